package analysis

import (
	"context"
	"errors"
	"fmt"
	"math"
	"path/filepath"
	"strings"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
	"github.com/desmear/desmear/unfold/validate"
)

// OutputError is a failure to write the result folder (the inputs were
// fine).
type OutputError struct {
	Folder string
	Err    error
}

func (e *OutputError) Error() string { return fmt.Sprintf("writing %s: %v", e.Folder, e.Err) }
func (e *OutputError) Unwrap() error { return e.Err }

// Outcome is everything a run produced.
type Outcome struct {
	Response     *response.Built
	ResponseInfo *response.BundleInfo
	Data         *Measured
	Background   *Expected
	// Problem is the unfolding problem assembled from them.
	Problem *unfold.Problem
	Result  *unfold.Result
	// Document is the result document written.
	Document *result.Result
	// IterationsChosen records the automatic choice of the number of
	// iterations (iterations: auto); nil otherwise.
	IterationsChosen *validate.Choice
	// Bias is the bias estimate of uncertainty.bias_toys; nil without.
	Bias *validate.Bias
	// Remedies reports what the remedies of the settings changed in the
	// problem (unfold.Remedy); Warnings are the notes on the inputs
	// (efficiencies or purities above 1, data left out in switched-off
	// flows), each one line naming the bins.
	Remedies *unfold.Remedies
	Warnings []string
	// Notes say how the run went where it chose something (the blocks
	// of the bootstrap replicas), one line each.
	Notes []string
	// Folder is the result folder written.
	Folder string
	// Files lists the files written in it.
	Files []string

	// backgrounds are the background samples filled, kept for the
	// variations.
	backgrounds []backgroundSample
}

// CheckOutput reports early whether the result folder could be written.
func (a *Analysis) CheckOutput(replace bool) error {
	return result.Check(a.Output.Folder, replace)
}

// Run builds (or loads) the response, fills the data and the
// background, unfolds and writes the result folder atomically. replace
// allows replacing an earlier result folder. It is Nominal, Replicas
// for every replica unit, Vary for every variation in order and Finish,
// in one process.
func (a *Analysis) Run(ctx context.Context, opt *Options, replace bool) (*Outcome, error) {
	if err := a.CheckOutput(replace); err != nil {
		return nil, err
	}
	n, err := a.Nominal(ctx, opt)
	if err != nil {
		return nil, err
	}
	replicas, err := n.Replicas(ctx, 0, n.ReplicaUnits())
	if err != nil {
		return nil, err
	}
	varied := make([]*Varied, len(a.Variations))
	for k := range a.Variations {
		if varied[k], err = n.Vary(ctx, k); err != nil {
			return nil, err
		}
	}
	return n.Finish(ctx, replicas, varied, replace)
}

// Nominal is the nominal unfolding of an analysis, before its systematic
// variations: what each variation is unfolded against (Vary) and what
// their shifts are added to (Finish).
type Nominal struct {
	a     *Analysis
	out   *Outcome
	s     *unfold.Settings
	m     unfold.Method
	fixed unfold.Method // m with the regularisation the nominal ended with
	ref   []float64
	opt   *Options
}

// Nominal assembles the problem (Assemble), chooses the iterations when
// the file asks for it and unfolds the nominal data with the nominal
// settings, as Run does before the variations.
func (a *Analysis) Nominal(ctx context.Context, opt *Options) (*Nominal, error) {
	out, p, err := a.Assemble(ctx, opt)
	if err != nil {
		return nil, err
	}
	s, m, err := a.Settings()
	if err != nil {
		return nil, err
	}
	if err := a.checkSourceCovariances(s); err != nil {
		return nil, err
	}
	if a.Unfolding.AutoIterations {
		if out.IterationsChosen, err = a.chooseIterations(ctx, p, s, m, opt); err != nil {
			return nil, err
		}
	}
	if err := a.derivedFit(p, s); err != nil {
		return nil, err
	}
	out.Problem = p
	ref, err := a.Reference()
	if err != nil {
		return nil, err
	}
	if out.Result, err = unfold.Unfold(ctx, p, s, m); err != nil {
		return nil, a.placeKernelError(err)
	}
	return &Nominal{a: a, out: out, s: s, m: m, fixed: fixRegularisation(m, out.Result), ref: ref, opt: opt}, nil
}

// Problem returns the nominal problem, as assembled (remedies applied).
func (n *Nominal) Problem() *unfold.Problem { return n.out.Problem }

// Inputs returns every input file of the analysis with its SHA-256, as
// the result records them (the files of the variations included).
func (n *Nominal) Inputs() ([]inputs.File, error) { return n.a.inputs(n.out) }

// Finish adds to the nominal result the simulation source of the
// bootstrap replicas (uncertainty.replicas; nil without), from replicas:
// the ensembles of every replica unit in order, as Replicas returns them;
// and the source of every variation, from varied: the varied estimates
// of the analysis's variations, in order, as Vary returns them. Either
// may have been computed by other processes and read back. Then it
// estimates the bias (uncertainty.bias_toys) and writes the result
// folder atomically: what Run writes.
func (n *Nominal) Finish(ctx context.Context, replicas []ReplicaEnsembles, varied []*Varied, replace bool) (*Outcome, error) {
	a, out, s := n.a, n.out, n.s
	if err := a.addReplicas(out, s, replicas); err != nil {
		return nil, err
	}
	if err := a.addVariations(out, s, varied); err != nil {
		return nil, err
	}
	if s.BiasToys > 0 {
		var progress func(done, total int)
		if n.opt != nil && n.opt.Progress != nil {
			progress = func(done, total int) { n.opt.Progress("estimating the bias", int64(done), int64(total)) }
		}
		var err error
		if out.Bias, err = validate.EstimateBias(ctx, out.Problem, s, n.m, out.Result, progress); err != nil {
			return nil, a.placeKernelError(err)
		}
	}
	if err := a.write(out, s, n.m, n.ref, replace, n.opt); err != nil {
		var ne *unfold.NumericalError // of the comparison with the reference
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) || errors.As(err, &ne) {
			return nil, err
		}
		return nil, &OutputError{Folder: a.Output.Folder, Err: err}
	}
	return out, nil
}

// chooseIterations runs the toy scan of iterations: auto and sets the
// chosen number in m (the iterative method's settings).
func (a *Analysis) chooseIterations(ctx context.Context, p *unfold.Problem, s *unfold.Settings, m unfold.Method, opt *Options) (*validate.Choice, error) {
	b, ok := m.(*bayes.Settings)
	if !ok {
		return nil, fmt.Errorf("analysis: iterations: auto with the method %s, which Decode refuses", m.Name())
	}
	var progress func(done, total int)
	if opt != nil && opt.Progress != nil {
		progress = func(done, total int) { opt.Progress("choosing the iterations", int64(done), int64(total)) }
	}
	ch, err := validate.Choose(ctx, p, s, b.WithIterations, a.Uncertainty.Seed, progress)
	if err != nil {
		return nil, a.placeKernelError(err)
	}
	b.Iterations = ch.K
	return ch, nil
}

// Assemble checks every input, builds (or loads) the response, fills
// the data and the background and returns them with the unfolding
// problem, without unfolding: what Run unfolds, and what other studies
// of the same problem start from.
func (a *Analysis) Assemble(ctx context.Context, opt *Options) (*Outcome, *unfold.Problem, error) {
	if a.Data.Kind == DataMissing {
		return nil, nil, a.missingData()
	}
	// Every input is checked here, once, before any event is read.
	if err := a.CheckInputs(a.ResponseFile == "", true); err != nil {
		return nil, nil, err
	}
	if err := a.checkVariations(); err != nil {
		return nil, nil, err
	}
	out := &Outcome{}
	var err error
	if a.ResponseFile != "" {
		out.Response, out.ResponseInfo, err = a.LoadResponse()
	} else {
		out.Response, out.ResponseInfo, err = a.buildResponse(ctx, opt)
	}
	if err != nil {
		return nil, nil, err
	}
	if out.Data, err = a.FillData(ctx, opt); err != nil {
		return nil, nil, err
	}
	if out.backgrounds, err = a.backgroundSamples(ctx, opt); err != nil {
		return nil, nil, err
	}
	if out.Background, err = a.expected(out.Response, out.backgrounds, nil); err != nil {
		return nil, nil, err
	}
	p, err := a.Problem(out.Response, out.Data, out.Background)
	if err != nil {
		return nil, nil, err
	}
	s, _, err := a.Settings()
	if err != nil {
		return nil, nil, err
	}
	if p, out.Remedies, err = unfold.Remedy(p, s, a.Reco.Label, a.Truth.Label); err != nil {
		return nil, nil, a.placeKernelError(err)
	}
	out.Warnings = a.warnings(out)
	return out, p, nil
}

func (a *Analysis) inputs(out *Outcome) ([]inputs.File, error) {
	var ins []inputs.File
	add := func(role, path string) error {
		if path == "" {
			return nil
		}
		in, err := inputs.Hash(role, path)
		if err != nil {
			return err
		}
		ins = append(ins, in)
		return nil
	}
	if err := add("analysis", a.File); err != nil {
		return nil, err
	}
	if err := add("truth-binning", a.TruthFile); err != nil {
		return nil, err
	}
	if err := add("reco-binning", a.RecoFile); err != nil {
		return nil, err
	}
	if a.ResponseFile != "" {
		for _, name := range response.BundleFiles() {
			if err := add("response", filepath.Join(a.ResponseFile, name)); err != nil {
				return nil, err
			}
		}
	}
	if out.ResponseInfo != nil {
		ins = append(ins, out.ResponseInfo.Inputs...)
	}
	if err := add("data", a.Data.File); err != nil {
		return nil, err
	}
	for _, b := range a.Backgrounds {
		if err := add("background", b.File); err != nil {
			return nil, err
		}
	}
	if err := add("prior", a.Unfolding.PriorFile); err != nil {
		return nil, err
	}
	if err := add("compare", a.Compare); err != nil {
		return nil, err
	}
	for _, v := range a.Variations {
		for _, ch := range []*Change{v.Change, v.Up, v.Down} {
			if ch == nil {
				continue
			}
			for _, f := range ch.Files {
				if err := add("variation", f); err != nil {
					return nil, err
				}
			}
		}
	}
	return ins, nil
}

func finitePtrs(v []float64) []*float64 {
	if v == nil {
		return nil
	}
	out := make([]*float64, len(v))
	for i, x := range v {
		if !math.IsNaN(x) && !math.IsInf(x, 0) {
			out[i] = &x
		}
	}
	return out
}

func (a *Analysis) write(out *Outcome, s *unfold.Settings, m unfold.Method, ref []float64, replace bool, opt *Options) (err error) {
	doc, err := result.FromUnfold(out.Result)
	if err != nil {
		return err
	}
	doc.SetProblem(out.Problem)
	doc.Program = result.Program{Name: "desmear"}
	if opt != nil {
		doc.Program.Version = opt.Version
	}
	if doc.Inputs, err = a.inputs(out); err != nil {
		return err
	}
	for k := range doc.Inputs {
		doc.Inputs[k].Path = opt.shown(doc.Inputs[k].Path)
	}
	prior := "generated"
	if a.Unfolding.Prior != "simulation" {
		prior = a.Unfolding.Prior
	}
	doc.Settings = result.DescribeSettings(s, m, prior, out.Background != nil)
	doc.Settings.IterationsChosen = out.IterationsChosen
	doc.TruthBinning = result.DescribeBinning(a.Truth, opt.shown(a.TruthFile))
	doc.RecoBinning = result.DescribeBinning(a.Reco, opt.shown(a.RecoFile))
	doc.Analysis = &result.Analysis{File: opt.shown(a.File), Title: a.Title}
	doc.Purity, doc.Stability = finitePtrs(out.Response.Purity(nil)), finitePtrs(out.Response.Stability(nil))
	doc.Density, doc.DensityUncertainty = result.Densities(a.Truth, doc.Estimate, doc.Uncertainty, a.Output.Luminosity)
	for _, q := range []struct {
		name string
		x    []float64
	}{{"density", doc.Density}, {"density uncertainty", doc.DensityUncertainty}} {
		for j, v := range q.x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return &unfold.NumericalError{Iteration: -1, Reason: fmt.Sprintf("the %s of truth bin %d (%s) is %v: the estimate ÷ the bin volume ÷ the luminosity %g overflows; give the luminosity in a larger unit", q.name, j, a.Truth.Label(j), v, a.Output.Luminosity)}
			}
		}
	}
	doc.Luminosity, doc.LuminosityUnit = a.Output.Luminosity, a.Output.LuminosityUnit
	doc.SliceAxis = a.Output.RootSliceAxis
	for i, q := range a.Output.Derived {
		doc.Derived = append(doc.Derived, result.NewDerivedFromSources(q, out.Result, i))
	}
	doc.ResponseSummary = &out.Response.Summary
	doc.DataEvents, doc.DataSelected, doc.DataOutside = out.Data.Events, out.Data.Selected, out.Data.Outside
	doc.SetBias(out.Bias)
	if out.Data.OutsideContent != 0 {
		doc.DataOutsideContent = &out.Data.OutsideContent
		doc.DataOutsideFraction = &out.Data.OutsideFraction
	}
	if !out.Remedies.Empty() {
		doc.Remedies = out.Remedies
	}
	doc.Warnings = out.Warnings
	if ref != nil {
		if err := doc.Compare(out.Result, ref, a.Compare, a.Truth); err != nil {
			return err
		}
	}

	f, err := result.New(a.Output.Folder, replace)
	if err != nil {
		return err
	}
	defer f.Abort()
	if out.Files, err = result.Write(f, doc, a.Truth, a.Output.Formats); err != nil {
		return err
	}
	if err := f.Commit(); err != nil {
		return err
	}
	out.Folder = opt.shown(a.Output.Folder)
	out.Document = doc
	return nil
}

// placeKernelError puts an input error of the unfolding kernel at the key
// of the analysis file whose input it concerns, with the labels of the
// bins concerned, so that the message names the file and what to look at.
// Other errors are returned unchanged.
func (a *Analysis) placeKernelError(err error) error {
	var ue *unfold.InputError
	if !errors.As(err, &ue) {
		return err
	}
	e := &Error{File: a.File, Err: err}
	what := ""
	switch ue.Field {
	case "Migrations", "Generated":
		switch {
		case a.ResponseFile != "":
			e.Field, e.Line = "response", a.responseLine
		case len(a.Simulation) > 0:
			e.Field, e.Line = "simulation", a.Simulation[0].Line
		}
	case "Data", "DataVariance":
		e.Field, e.Line = "data", a.Data.Line
	case "Background", "BackgroundVariance":
		// The expected background holds the simulation's fakes and the
		// background samples.
		what = "the expected background (the simulation's fakes and the backgrounds): "
		e.Field = "backgrounds"
		if len(a.Backgrounds) == 0 {
			what = "the expected background (the simulation's fakes): "
			e.Field = "simulation"
		}
	case "Prior":
		e.Field = "unfolding.prior_file"
	default:
		e.Field = ue.Field
	}
	var where []string
	if ue.Reco >= 0 && ue.Reco < a.Reco.Len() {
		where = append(where, fmt.Sprintf("reco bin %d (%s)", ue.Reco, a.Reco.Label(ue.Reco)))
	}
	if ue.Truth >= 0 && ue.Truth < a.Truth.Len() {
		where = append(where, fmt.Sprintf("truth bin %d (%s)", ue.Truth, a.Truth.Label(ue.Truth)))
	}
	advice := strings.NewReplacer(unfold.NegativeCellsAdvice, "unfolding.negative_cells: clip", unfold.UnexplainedAdvice, "unfolding.unexplained: drop")
	e.Msg = what + advice.Replace(ue.Reason)
	if len(where) > 0 {
		e.Msg = strings.Join(where, ", ") + ": " + e.Msg
	}
	return e
}

// ResponseWarnings returns one line for each kind of implausible value
// of the response r, naming the truth bins: efficiencies above 1 and
// purities above 1, which only negative event weights can produce.
func (a *Analysis) ResponseWarnings(r *response.Built) []string {
	var out []string
	for _, q := range []struct {
		name string
		v    []float64
	}{{"efficiency", r.Efficiency(nil)}, {"purity", r.Purity(nil)}} {
		var bins []string
		for j, x := range q.v {
			if x > 1+unfold.EfficiencyTolerance {
				if len(bins) == maxWarned {
					bins = append(bins, "...")
					break
				}
				bins = append(bins, fmt.Sprintf("%d (%s) %.3g", j, a.Truth.Label(j), x))
			}
		}
		if len(bins) > 0 {
			out = append(out, fmt.Sprintf("the %s is above 1 in truth bins %s: negative event weights in the simulation; check those bins", q.name, strings.Join(bins, ", ")))
		}
	}
	return out
}

// maxWarned bounds the bins a warning lists.
const maxWarned = 20

// warnings returns the notes on the inputs of out: those of the
// response, and the data left out in switched-off flows.
func (a *Analysis) warnings(out *Outcome) []string {
	w := a.ResponseWarnings(out.Response)
	if d := out.Data; d != nil && d.OutsideContent != 0 {
		w = append(w, fmt.Sprintf("data: %.6g (%.3g%% of the data read) lie in flows the reco binning switches off and are left out", d.OutsideContent, 100*d.OutsideFraction))
	}
	return w
}
