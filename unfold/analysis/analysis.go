package analysis

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/derive"
	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/methods"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/binbybin"
	"github.com/desmear/desmear/unfold/result"
)

// Analysis is a decoded and checked analysis file. File names in it are
// resolved against the folder of the analysis file.
type Analysis struct {
	// File is the analysis file's path as given; Dir its folder.
	File, Dir string
	Title     string

	// Truth and Reco are the binning schemes; TruthFile and RecoFile
	// their files ("" when given inline).
	Truth, Reco         *binning.Scheme
	TruthFile, RecoFile string

	// TruthObservables and RecoObservables are the default expressions
	// of each axis of the truth and reco schemes, in the schemes' axis
	// order (AxisNames).
	TruthObservables, RecoObservables []Expression

	// Simulation lists the simulated samples.
	Simulation []Sample
	// ResponseFile, when not empty, names a saved response bundle to
	// load instead of building the response from Simulation.
	ResponseFile string
	responseLine int
	replicasLine int // of uncertainty.replicas
	derivedLine  int // of output.derived

	Data        Data
	Backgrounds []Background
	Unfolding   Unfolding
	Uncertainty Uncertainty
	Output      Output
	Workers     int
	BatchSize   int

	// Compare, when not empty, names a reference spectrum (a truth,value
	// table over the truth binning) that the result is compared with
	// (key compare; resolved).
	Compare string

	// Stress lists the stress tests of validation.stress: a name and
	// weights per truth bin, the weight expression evaluated over the
	// truth axes at the bin centres (validate.Weights).
	Stress []Stress

	// Variations lists the systematic variations: those of the file's
	// variations, then one per background with a scale uncertainty
	// (named ScaleSourceName of the background).
	Variations []Variation
}

// Stress is a stress test of the analysis file.
type Stress struct {
	Name    string
	Weight  Expression
	Weights []float64
}

// Expression is an expression text with its position in the analysis
// file.
type Expression struct {
	Text  string
	Line  int
	Field string
}

// Sample is a simulated sample.
type Sample struct {
	File           string // resolved path
	Tree           string
	Weight         Expression // empty Text: weight 1
	TruthSelection Expression // empty Text: every event passes
	RecoSelection  Expression
	Scale          float64 // 1 when not given
	// Truth and Reco are the observables of this sample, per axis of
	// the truth and reco schemes (the file-wide ones unless overridden).
	Truth, Reco []Expression
	Field       string // e.g. "simulation[0]", for messages
	Line        int
	// FileField names the key of File in messages when it is not
	// Field + ".file" (a variation's alternative file).
	FileField string
}

// DataKind says where the data come from.
type DataKind int

const (
	// DataEvents fills the reco scheme from an events file.
	DataEvents DataKind = iota
	// DataHistogram reads a ROOT TH1D/TH2D.
	DataHistogram
	// DataTable reads a plain table (reco,value[,variance]).
	DataTable
	// DataMissing: the file has no data section. Building the response
	// needs none; unfolding refuses it (the error of FillData and Run).
	DataMissing
)

// Data is the measured input.
type Data struct {
	Kind        DataKind
	File        string // resolved path
	Tree        string // DataEvents
	Weight      Expression
	Selection   Expression
	Observables []Expression // DataEvents, per reco axis
	Name        string       // DataHistogram: the histogram's name in the file
	Line        int
}

// Background is one background sample: events filled in the reco
// scheme, or a plain table, times Scale, with a relative uncertainty of
// the scale.
type Background struct {
	Name             string
	Kind             DataKind // DataEvents or DataTable
	File             string
	Tree             string
	Weight           Expression
	Selection        Expression
	Observables      []Expression
	Scale            float64 // 1 when not given
	ScaleUncertainty float64 // relative
	Field            string
	Line             int
}

// Unfolding holds the settings of the iteration.
type Unfolding struct {
	// Method is the unfolding method's name (methods.Names).
	Method     string
	Iterations int
	// AutoIterations is "iterations: auto": the number of iterations is
	// chosen by a toy scan before the unfolding (validate.Choose).
	AutoIterations bool
	StopChi2       float64
	MaxIterations  int
	// Prior is "simulation" (the generated spectrum), "flat" or "file".
	Prior     string
	PriorFile string // resolved, when Prior is "file"
	// Smoothing is the smoothing strength in (0, 1]; 0 means none.
	Smoothing float64
	// Tau is the fixed tau of the Tikhonov method (0: chosen by
	// TauCriterion, "lcurve" or "correlation"; "" means the default).
	Tau          float64
	TauCriterion string
	// Penalty ("curvature" or "slope"), Widths (divide by the bin widths)
	// and Bias ("zero" or "prior") are the Tikhonov method's penalty
	// ("" means the default).
	Penalty string
	Widths  bool
	Bias    string
	// Background is "model" (inside the folded expectation) or
	// "subtract" (from the data first).
	Background string
	// Fakes is "background" (the simulation's fakes are part of the
	// expected background, the default) or "ignore".
	Fakes string
	// NegativeCells ("refuse" or "clip") and Unexplained ("refuse" or
	// "drop") are the remedies of unfold.Remedy.
	NegativeCells, Unexplained string
	// MemoryLimit in bytes; 0 means the kernel's default.
	MemoryLimit int64
}

// Uncertainty holds the uncertainty settings.
type Uncertainty struct {
	Covariance string // none, diag or full
	Method     string // auto, exact, probes, toys or gamma (diag only)
	Probes     int
	Toys       int
	Seed       uint64
	// ResponseSamples is the number of sampled responses (0: none),
	// SamplingPrior the prior of the sampling (none or flat).
	ResponseSamples int
	SamplingPrior   string
	BiasToys        int // toys of the bias estimate; 0: none
	// Replicas is the number of Poisson bootstrap replicas of the
	// simulated events (0: none).
	Replicas int
	// VarianceFrom is counts or expectation ("" for the default).
	VarianceFrom string
}

// Output holds the output settings.
type Output struct {
	Folder         string // resolved
	Formats        []string
	Luminosity     float64
	LuminosityUnit string
	// RootSliceAxis is the axis the ROOT slice histograms run along
	// ("" for the last axis of each region; see result.SlicesAlong).
	RootSliceAxis string
	// Derived lists the derived quantities of output.derived, checked
	// against the truth binning.
	Derived []*derive.Quantity
}

// Load reads, decodes and checks the analysis file at path. Problems in
// the file are *Error values (or Errors, several at once) naming the
// file, the line and the field; problems inside a binning scheme are
// *binning.Error values.
func Load(path string) (*Analysis, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, &Error{File: path, Msg: fmt.Sprintf("cannot read the analysis file: %v", unwrapPath(err)), Err: err}
	}
	defer f.Close()
	src, err := io.ReadAll(io.LimitReader(f, MaxFileBytes+1))
	if err != nil {
		return nil, &Error{File: path, Msg: fmt.Sprintf("cannot read the analysis file: %v", unwrapPath(err)), Err: err}
	}
	if len(src) > MaxFileBytes {
		return nil, &Error{File: path, Msg: fmt.Sprintf("larger than %d MiB, the limit for an analysis file; is it an analysis file?", MaxFileBytes>>20)}
	}
	return Decode(src, path)
}

// Decode decodes and checks an analysis file's content; path names it
// in messages and its folder resolves relative file names.
func Decode(src []byte, path string) (*Analysis, error) {
	doc, root, err := parse(path, src)
	if err != nil {
		return nil, err
	}
	c := &checker{file: path, root: root}
	a := &Analysis{File: path, Dir: filepath.Dir(path), Title: doc.Title}

	// Binning.
	a.Truth, a.TruthFile, err = schemeFrom(path, a.Dir, "binning.truth", doc.Binning.Truth.node)
	if err != nil {
		return nil, err
	}
	a.Reco, a.RecoFile, err = schemeFrom(path, a.Dir, "binning.reco", doc.Binning.Reco.node)
	if err != nil {
		return nil, err
	}

	// Observables.
	a.TruthObservables = c.levelExprs("observables.truth", doc.Observables.Truth.node, a.Truth, nil, true)
	a.RecoObservables = c.levelExprs("observables.reco", doc.Observables.Reco.node, a.Reco, nil, true)

	// Simulation or saved response.
	a.ResponseFile = resolve(a.Dir, doc.Response)
	a.responseLine = c.line("response")
	if len(doc.Simulation) == 0 && doc.Response == "" {
		c.errf(c.line("simulation"), "simulation", "missing: list the simulated samples, or name a saved response with the key response")
	}
	for i, s := range doc.Simulation {
		f := fmt.Sprintf("simulation[%d]", i)
		sm := Sample{Field: f, Line: c.line("simulation", i), Tree: s.Tree, Scale: s.Scale}
		sm.File = c.path(f+".file", s.File, c.keyLine("simulation", i, "file"), sm.Line)
		if sm.File != "" && events.FormatOf(sm.File) == events.FormatUnknown {
			c.errf(c.line("simulation", i, "file"), f+".file", "unknown events format of %q (use .root, .parquet or .csv)", s.File)
		}
		sm.Weight = c.expr(s.Weight, "simulation", i, "weight")
		sm.TruthSelection = c.expr(s.TruthSelection, "simulation", i, "truth_selection")
		sm.RecoSelection = c.expr(s.RecoSelection, "simulation", i, "reco_selection")
		sm.Scale = c.scale(s.Scale, 1, "simulation", i, "scale")
		sm.Truth = c.levelExprs(f+".truth_observables", s.Truth.node, a.Truth, a.TruthObservables, false)
		sm.Reco = c.levelExprs(f+".reco_observables", s.Reco.node, a.Reco, a.RecoObservables, false)
		a.Simulation = append(a.Simulation, sm)
	}

	// Data.
	a.Data = c.data(doc.Data, a)

	// Backgrounds.
	for i, b := range doc.Backgrounds {
		f := fmt.Sprintf("backgrounds[%d]", i)
		bg := Background{Name: b.Name, Tree: b.Tree, Field: f, Line: c.line("backgrounds", i)}
		if bg.Name == "" {
			bg.Name = fmt.Sprintf("background %d", i)
		}
		switch {
		case b.Events != "" && b.Table != "":
			c.errf(bg.Line, f, "give either events or table, not both")
		case b.Events != "":
			bg.Kind = DataEvents
			bg.File = c.path(f+".events", b.Events, c.keyLine("backgrounds", i, "events"), bg.Line)
			if events.FormatOf(bg.File) == events.FormatUnknown {
				c.errf(c.line("backgrounds", i, "events"), f+".events", "unknown events format of %q (use .root, .parquet or .csv)", b.Events)
			}
			bg.Weight = c.expr(b.Weight, "backgrounds", i, "weight")
			bg.Selection = c.expr(b.Selection, "backgrounds", i, "selection")
			bg.Observables = c.levelExprs(f+".observables", b.Observables.node, a.Reco, a.RecoObservables, false)
		case b.Table != "":
			bg.Kind = DataTable
			bg.File = c.path(f+".table", b.Table, c.keyLine("backgrounds", i, "table"), bg.Line)
			for _, k := range []string{"tree", "weight", "selection", "observables"} {
				if n := nodeAt(root, "backgrounds", i, k); n != nil {
					c.errf(n.Line, f+"."+k, "applies to an events file only, not to a table")
				}
			}
		default:
			c.errf(bg.Line, f, "missing: give events (an events file) or table (a plain-table background.csv)")
		}
		bg.Scale = c.scale(b.Scale, 1, "backgrounds", i, "scale")
		if u := b.ScaleUncertainty; u < 0 || math.IsNaN(u) || math.IsInf(u, 0) {
			c.errf(c.line("backgrounds", i, "scale_uncertainty"), f+".scale_uncertainty", "must be a finite relative uncertainty ≥ 0, e.g. 0.1 for 10%%")
		}
		bg.ScaleUncertainty = b.ScaleUncertainty
		a.Backgrounds = append(a.Backgrounds, bg)
	}

	// Unfolding.
	u := doc.Unfolding
	a.Unfolding = Unfolding{Method: u.Method, Iterations: u.Iterations.n, AutoIterations: u.Iterations.auto, StopChi2: u.StopChi2, MaxIterations: u.MaxIterations,
		Prior: u.Prior, Smoothing: u.Smoothing, Tau: u.Tau, TauCriterion: u.TauCriterion,
		Penalty: u.Penalty, Widths: u.Widths, Bias: u.Bias, Background: u.Background, Fakes: u.Fakes,
		NegativeCells: u.NegativeCells, Unexplained: u.Unexplained}
	if u.Iterations.auto && u.StopChi2 != 0 {
		c.errf(c.line("unfolding", "iterations"), "unfolding.iterations", "give either iterations (a number or auto) or stop_chi2, not both")
	}
	if u.MaxIterations != 0 && u.StopChi2 == 0 {
		c.errf(c.line("unfolding", "max_iterations"), "unfolding.max_iterations", "bounds the stopping rule: give stop_chi2 too, or use iterations")
	}
	c.oneOf(&a.Unfolding.Method, methods.Default, methods.Names(), "unfolding", "method")
	if a.Unfolding.AutoIterations && a.Unfolding.Method != bayes.Name {
		c.errf(c.line("unfolding", "iterations"), "unfolding.iterations", "auto applies to the iterative method (%s) only", bayes.Name)
	}
	if nodeAt(root, "unfolding", "tau") != nil && !(u.Tau > 0) {
		c.errf(c.line("unfolding", "tau"), "unfolding.tau", "must be a tau > 0 (or leave it out to choose tau with tau_criterion)")
	}
	if nodeAt(root, "unfolding", "tau") != nil && nodeAt(root, "unfolding", "tau_criterion") != nil {
		c.errf(c.line("unfolding", "tau"), "unfolding.tau", "give either tau (a fixed tau) or tau_criterion (to choose it), not both")
	}
	c.methodKeys(a.Unfolding.Method)
	if a.Unfolding.Method == binbybin.Name && !sameBins(a.Truth, a.Reco) {
		c.errf(c.line("unfolding", "method"), "unfolding.method", "bin-by-bin needs the same truth and reco binning (the truth binning has %d bins, the reco binning %d, or their bins differ): use an unfolding method", a.Truth.Len(), a.Reco.Len())
	}
	c.oneOf(&a.Unfolding.Prior, "simulation", []string{"simulation", "flat", "file"}, "unfolding", "prior")
	if a.Unfolding.Prior == "file" {
		a.Unfolding.PriorFile = c.path("unfolding.prior_file", u.PriorFile, c.keyLine("unfolding", "prior_file"), c.line("unfolding", "prior"))
	} else if u.PriorFile != "" {
		c.errf(c.line("unfolding", "prior_file"), "unfolding.prior_file", "is used only with prior: file")
	}
	c.oneOf(&a.Unfolding.Background, unfold.InModel.String(), names(unfold.BackgroundModes()), "unfolding", "background")
	c.oneOf(&a.Unfolding.Fakes, "background", []string{"background", "ignore"}, "unfolding", "fakes")
	c.oneOf(&a.Unfolding.NegativeCells, unfold.RefuseNegative.String(), names(unfold.NegativeCellsModes()), "unfolding", "negative_cells")
	c.oneOf(&a.Unfolding.Unexplained, unfold.RefuseUnexplained.String(), names(unfold.UnexplainedModes()), "unfolding", "unexplained")
	// A limit below one byte would truncate to 0, the kernel's default:
	// refuse it (and an explicit 0) rather than silently use the default.
	if m := u.MemoryLimit; m < 0 || math.IsNaN(m) || math.IsInf(m, 0) || m*(1<<30) >= math.MaxInt64 ||
		(nodeAt(root, "unfolding", "memory_limit_gib") != nil && m*(1<<30) < 1) {
		c.errf(c.line("unfolding", "memory_limit_gib"), "unfolding.memory_limit_gib", "must be a positive number of GiB, e.g. 4 or 0.5")
	} else {
		a.Unfolding.MemoryLimit = int64(m * (1 << 30))
	}

	// Uncertainty.
	un, o := doc.Uncertainty, doc.Output
	a.Uncertainty = Uncertainty{Covariance: un.Covariance, Method: un.Method, Probes: un.Probes, Toys: un.Toys, Seed: un.Seed,
		ResponseSamples: un.ResponseSamples, SamplingPrior: un.SamplingPrior, BiasToys: un.BiasToys, VarianceFrom: un.VarianceFrom,
		Replicas: un.Replicas}
	a.replicasLine = c.line("uncertainty", "replicas")
	if un.Replicas != 0 && a.ResponseFile != "" {
		c.errf(c.line("uncertainty", "replicas"), "uncertainty.replicas", "needs the simulated events, but the response is read from a saved bundle (response): give the simulation instead, or use uncertainty.response_samples")
	}
	if nodeAt(root, "uncertainty", "seed") == nil {
		a.Uncertainty.Seed = DefaultSeed
	}
	c.oneOf(&a.Uncertainty.Covariance, unfold.Diagonal.String(), names(unfold.CovarianceModes()), "uncertainty", "covariance")
	c.oneOf(&a.Uncertainty.Method, unfold.DiagonalAuto.String(), names(unfold.DiagonalMethods()), "uncertainty", "method")
	c.oneOf(&a.Uncertainty.SamplingPrior, unfold.NoSamplingPrior.String(), names(unfold.SamplingPriors()), "uncertainty", "sampling_prior")
	// Zero is each of these settings' "not given" value: written out, it
	// would silently mean the default, so it is refused.
	for _, z := range []struct {
		v    float64
		path []any
		want string
	}{
		{float64(u.Iterations.n) + map[bool]float64{true: 1}[u.Iterations.auto], []any{"unfolding", "iterations"}, "a number of iterations ≥ 1 (or auto)"},
		{float64(u.MaxIterations), []any{"unfolding", "max_iterations"}, "a bound ≥ 1 on the iterations"},
		{u.StopChi2, []any{"unfolding", "stop_chi2"}, "a χ² change > 0 at which to stop"},
		{float64(un.Probes), []any{"uncertainty", "probes"}, "a number of probes ≥ 1"},
		{float64(un.Toys), []any{"uncertainty", "toys"}, "a number of toys ≥ 1"},
		{o.Luminosity, []any{"output", "luminosity"}, "a positive integrated luminosity"},
	} {
		if z.v == 0 && nodeAt(root, z.path...) != nil && nodeAt(root, z.path...).ShortTag() != "!!null" {
			c.errf(c.line(z.path...), fieldName(z.path...), "0 is not allowed: give %s, or leave the key out for the default", z.want)
		}
	}
	if len(c.errs) == 0 {
		c.settings(a)
	}

	// Output.
	a.Output = Output{Formats: o.Formats, Luminosity: o.Luminosity, LuminosityUnit: o.LuminosityUnit}
	if o.Folder == "" {
		c.errf(c.line("output"), "result.folder", "missing: name the result folder (relative to the analysis file)")
	}
	a.Output.Folder = resolve(a.Dir, o.Folder)
	if a.Output.Formats == nil {
		a.Output.Formats = result.DefaultFormats()
	}
	for i, f := range a.Output.Formats {
		if err := result.CheckFormats([]string{f}); err != nil {
			c.errf(c.line("output", "formats", i), fmt.Sprintf("result.formats[%d]", i), "%v", err)
		}
	}
	if l := o.Luminosity; l < 0 || math.IsNaN(l) || math.IsInf(l, 0) {
		c.errf(c.line("output", "luminosity"), "result.luminosity", "must be a positive integrated luminosity")
	}

	if a.Output.RootSliceAxis = strings.TrimSpace(o.RootSliceAxis); a.Output.RootSliceAxis != "" && a.Truth != nil {
		if _, err := result.SlicesAlong(a.Truth, a.Output.RootSliceAxis); err != nil {
			c.errf(c.line("output", "root_slice_axis"), "output.root_slice_axis", "%v", err)
		}
	}
	c.derived(a, o.Derived)
	a.derivedLine = c.line("output", "derived")
	c.stress(a, doc.Validation.Stress)
	if nodeAt(root, "compare") != nil {
		a.Compare = c.path("compare", doc.Compare, c.keyLine("compare"), c.line("compare"))
	}
	c.variations(a, doc.Variations)

	// Processing.
	a.Workers, a.BatchSize = doc.Processing.Workers, doc.Processing.BatchSize
	if a.Workers < 0 || a.Workers > MaxWorkers {
		c.errf(c.line("processing", "workers"), "processing.workers", "must be between 0 (one per core) and %d", MaxWorkers)
	}
	if a.BatchSize < 0 || a.BatchSize > MaxBatchSize {
		c.errf(c.line("processing", "batch_size"), "processing.batch_size", "must be between 0 (the default) and %d events", MaxBatchSize)
	}
	if a.BatchSize == 0 {
		a.BatchSize = DefaultBatchSize
	}

	if len(c.errs) == 1 {
		return nil, c.errs[0]
	}
	if len(c.errs) > 1 {
		return nil, c.errs
	}
	return a, nil
}

// DefaultSeed seeds the probes and toys when the file gives no seed
// (the same default as the plain-table unfold command).
const DefaultSeed = 1

// DefaultBatchSize is the number of events read and processed at once.
const DefaultBatchSize = 1 << 14

// Limits on what an analysis file may ask for, checked before any memory
// is taken for it: every worker holds batches of processing.batch_size
// events of every column it reads, so both are bounded, and so is the
// size of the file itself.
const (
	MaxBatchSize = 1 << 20
	MaxWorkers   = 256
	MaxFileBytes = 16 << 20
)

type checker struct {
	file string
	root *yaml.Node
	errs Errors
}

// settingKeys maps the fields of unfold.Settings and of the methods' settings to
// their keys in the analysis file.
var settingKeys = map[string][]any{
	"Iterations":      {"unfolding", "iterations"},
	"StopChi2":        {"unfolding", "stop_chi2"},
	"MaxIterations":   {"unfolding", "max_iterations"},
	"Smoothing":       {"unfolding", "smoothing"},
	"Tau":             {"unfolding", "tau"},
	"Criterion":       {"unfolding", "tau_criterion"},
	"Penalty":         {"unfolding", "penalty"},
	"Widths":          {"unfolding", "divide_by_widths"},
	"Bias":            {"unfolding", "bias"},
	"Background":      {"unfolding", "background"},
	"MemoryLimit":     {"unfolding", "memory_limit_gib"},
	"NegativeCells":   {"unfolding", "negative_cells"},
	"Unexplained":     {"unfolding", "unexplained"},
	"Covariance":      {"uncertainty", "covariance"},
	"DiagonalMethod":  {"uncertainty", "method"},
	"Probes":          {"uncertainty", "probes"},
	"Toys":            {"uncertainty", "toys"},
	"ResponseSamples": {"uncertainty", "response_samples"},
	"SamplingPrior":   {"uncertainty", "sampling_prior"},
	"Seed":            {"uncertainty", "seed"},
	"BiasToys":        {"uncertainty", "bias_toys"},
	"Replicas":        {"uncertainty", "replicas"},
	"VarianceFrom":    {"uncertainty", "variance_from"},
}

// sameBins reports whether two schemes have the same bins (the same
// labels, which name the region and every edge, in the same order).
func sameBins(a, b *binning.Scheme) bool {
	if a.Len() != b.Len() {
		return false
	}
	for g := range a.Len() {
		if a.Label(g) != b.Label(g) {
			return false
		}
	}
	return true
}

// methodKeys refuses a key of one method's own settings given with
// another method.
func (c *checker) methodKeys(method string) {
	if !slices.Contains(methods.Names(), method) {
		return // refused already
	}
	fields := make([]string, 0, len(settingKeys))
	for f := range settingKeys {
		fields = append(fields, f)
	}
	slices.Sort(fields)
	for _, f := range fields {
		key := settingKeys[f]
		if owner := methods.Owner(f); owner != "" && owner != method && nodeAt(c.root, key...) != nil {
			c.errf(c.line(key...), fieldName(key...), "applies only to method %s (unfolding.method is %s)", owner, method)
		}
	}
}

// settings checks the unfolding and uncertainty settings of a with their
// validators and reports an invalid one at its key.
func (c *checker) settings(a *Analysis) {
	s, m, err := a.Settings()
	if err == nil && m != nil {
		if _, err = s.Resolve(); err == nil {
			err = m.Validate()
		}
	}
	var se *unfold.SettingsError
	if errors.As(err, &se) {
		key := settingKeys[se.Field]
		c.errf(c.line(key...), fieldName(key...), "%s", se.Reason)
	}
}

// names returns the text names of the values of an enumeration.
func names[T fmt.Stringer](vals []T) []string {
	out := make([]string, len(vals))
	for i, v := range vals {
		out[i] = v.String()
	}
	return out
}

func (c *checker) errf(line int, field, format string, args ...any) {
	c.errs = append(c.errs, &Error{File: c.file, Line: line, Field: field, Msg: fmt.Sprintf(format, args...)})
}

func (c *checker) line(path ...any) int {
	for len(path) > 0 {
		if n := nodeAt(c.root, path...); n != nil {
			return n.Line
		}
		path = path[:len(path)-1]
	}
	return 0
}

func fieldName(path ...any) string {
	var b strings.Builder
	for _, p := range path {
		switch p := p.(type) {
		case string:
			if b.Len() > 0 {
				b.WriteByte('.')
			}
			b.WriteString(p)
		case int:
			fmt.Fprintf(&b, "[%d]", p)
		}
	}
	return b.String()
}

func (c *checker) expr(text string, path ...any) Expression {
	return Expression{Text: strings.TrimSpace(text), Line: c.line(path...), Field: fieldName(path...)}
}

// keyLine returns the line of the node at path, or 0 when there is none
// (unlike line, it does not fall back to an enclosing key).
func (c *checker) keyLine(path ...any) int {
	if n := nodeAt(c.root, path...); n != nil {
		return n.Line
	}
	return 0
}

// path resolves the file name given at line (0 when its key is absent,
// then the message points at parentLine).
func (c *checker) path(field, name string, line, parentLine int) string {
	if name == "" {
		if line == 0 {
			line = parentLine
		}
		c.errf(line, field, "missing file name")
		return ""
	}
	return resolve(filepath.Dir(c.file), name)
}

func (c *checker) scale(v, def float64, path ...any) float64 {
	if nodeAt(c.root, path...) == nil {
		return def
	}
	if !(v > 0) || math.IsInf(v, 0) {
		c.errf(c.line(path...), fieldName(path...), "must be a finite number > 0")
	}
	return v
}

func (c *checker) oneOf(v *string, def string, options []string, path ...any) {
	if *v == "" {
		*v = def
		return
	}
	if !slices.Contains(options, *v) {
		c.errf(c.line(path...), fieldName(path...), "unknown value %q (one of: %s)", *v, strings.Join(options, ", "))
	}
}

// levelExprs reads a mapping axis name → expression for the axes of
// scheme. With required, every axis must be given; otherwise missing
// axes take the expression from defaults (and a nil node gives
// defaults).
func (c *checker) levelExprs(field string, n *yaml.Node, scheme *binning.Scheme, defaults []Expression, required bool) []Expression {
	names := scheme.AxisNames()
	out := make([]Expression, len(names))
	copy(out, defaults)
	if n == nil {
		if required {
			c.errf(0, field, "missing: give an expression for each axis (%s)", strings.Join(names, ", "))
		}
		return out
	}
	if n.Kind != yaml.MappingNode {
		c.errf(n.Line, field, "want a mapping from axis name to expression, e.g. {%s: \"...\"}", names[0])
		return out
	}
	seen := map[string]bool{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], n.Content[i+1]
		ax := scheme.AxisIndex(k.Value)
		if ax < 0 {
			c.errf(k.Line, field+"."+k.Value, "the binning has no axis %q (axes: %s)", k.Value, strings.Join(names, ", "))
			continue
		}
		if v.Kind != yaml.ScalarNode || strings.TrimSpace(v.Value) == "" {
			c.errf(v.Line, field+"."+k.Value, "want an expression over the input columns, e.g. \"abs(y_true)\"")
			continue
		}
		seen[k.Value] = true
		out[ax] = Expression{Text: strings.TrimSpace(v.Value), Line: v.Line, Field: field + "." + k.Value}
	}
	for ax, name := range names {
		if out[ax].Text == "" && (required || !seen[name]) {
			c.errf(n.Line, field, "no expression for axis %q", name)
		}
	}
	return out
}

// dataChoice says what the data section takes.
const dataChoice = "give exactly one of events (an events file), histogram (a ROOT file) or table (a plain-table n.csv)"

func (c *checker) data(d dataDoc, a *Analysis) Data {
	out := Data{Tree: d.Tree, Name: d.Name, Line: c.line("data")}
	given := 0
	for _, s := range []string{d.Events, d.Histogram, d.Table} {
		if s != "" {
			given++
		}
	}
	if given == 0 && nodeAt(c.root, "data") == nil {
		out.Kind = DataMissing
		return out
	}
	if given != 1 {
		c.errf(out.Line, "data", dataChoice)
		return out
	}
	only := func(keys ...string) {
		for _, k := range []string{"tree", "weight", "selection", "observables", "name"} {
			if n := nodeAt(c.root, "data", k); n != nil && !slices.Contains(keys, k) {
				c.errf(n.Line, "data."+k, "does not apply to this kind of data")
			}
		}
	}
	switch {
	case d.Events != "":
		out.Kind = DataEvents
		out.File = c.path("data.events", d.Events, c.keyLine("data", "events"), out.Line)
		out.Weight = c.expr(d.Weight, "data", "weight")
		out.Selection = c.expr(d.Selection, "data", "selection")
		out.Observables = c.levelExprs("data.observables", d.Observables.node, a.Reco, a.RecoObservables, false)
		only("tree", "weight", "selection", "observables")
	case d.Histogram != "":
		out.Kind = DataHistogram
		out.File = c.path("data.histogram", d.Histogram, c.keyLine("data", "histogram"), out.Line)
		only("name")
		regs := a.Reco.Regions()
		if len(regs) != 1 || !regs[0].Rectangular() || len(regs[0].Axes()) > 2 {
			c.errf(c.line("data", "histogram"), "data.histogram", "a ROOT histogram needs a reco binning of one rectangular region with one or two axes; use events or a table for this binning")
		}
		if out.Name == "" {
			c.errf(out.Line, "data.name", "missing: the name of the TH1D/TH2D in the file")
		}
	case d.Table != "":
		out.Kind = DataTable
		out.File = c.path("data.table", d.Table, c.keyLine("data", "table"), out.Line)
		only()
	}
	if out.Kind == DataEvents && events.FormatOf(out.File) == events.FormatUnknown {
		c.errf(c.line("data", "events"), "data.events", "unknown events format of %q (use .root, .parquet or .csv)", d.Events)
	}
	return out
}
