package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/cmd/desmear/internal/flagval"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/result"
	"github.com/desmear/desmear/unfold/validate"
)

// validateOptions are the options of "desmear validate". The plain-table
// inputs and the nominal settings use the fields of unfoldOptions.
type validateOptions struct {
	unfoldOptions
	truth     string
	toyTruth  string
	toys      int
	maxK      int
	criterion validate.Criterion
	threshold float64
	tilt      float64
}

func newValidateCommand(g *globalOptions) *cobra.Command {
	var o validateOptions
	cmd := &cobra.Command{
		Use:   "validate (ANALYSIS.yaml | --response A.csv --generated G.csv --data n.csv [--truth T.csv]) --out DIR [flags]",
		Short: "Scan the number of iterations with toys, run closure and stress tests, recommend an iteration count",
		Long: `validate measures how the unfolding behaves where the truth is known and
writes a validation folder DIR:

  - toys: Poisson pseudo-data drawn from a truth (--truth T.csv, or
    --toy-truth: the generated spectrum scaled to the data, the default; the
    nominal result; a tilt of the generated spectrum; or a stress test of the
    analysis file) folded through the response plus the background, each
    unfolded with 1..--max-iterations iterations;
    per iteration count the bias, variance, pulls, coverage of the truth by
    the +-1 sigma intervals and the mean squared error, each with its toy
    precision;
  - a recommendation: the iteration count minimising --criterion;
  - closure: the simulation's own reco spectrum unfolded, exactly and with
    Poisson fluctuations at the data's statistics;
  - stress tests: the simulated truth tilted linearly by --tilt percent along
    each axis of the truth binning, or reweighted by the expressions of the
    analysis file's validation.stress, folded, unfolded and compared with the
    reweighted truth and with the nominal result.

DIR holds validation.json, scan.csv, scan-bins.csv, checks.csv and the
figure of the scan (scan.png, scan.svg); it is
written atomically, and an existing DIR is replaced only with --force (and
only an earlier validation folder or an empty one). See "desmear help
validation".`,
		Example: `  desmear validate demo/analysis.yaml --out demo/validation
  desmear validate --response A.csv --generated G.csv --data n.csv --truth T.csv \
      --toys 1000 --max-iterations 15 --out validation`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := o.checkValidate(cmd, args); err != nil {
				return err
			}
			return runValidate(cmd.Context(), g, &o, args)
		},
	}
	f := cmd.Flags()
	o.tableFlags(f)
	f.Var(flagval.NewEnum(&o.bgMode, unfold.InModel, unfold.BackgroundModes()), "background-mode", "model or subtract (see \"desmear unfold --help\")")
	f.IntVar(&o.iterations, "iterations", 0, "iterations `K` of the nominal unfolding, for closure and stress tests (default 4)")
	f.StringVar(&o.truth, "truth", "", "truth table `T.csv` (truth,value) the toys are drawn from; default: the generated counts scaled to the data")
	f.StringVar(&o.toyTruth, "toy-truth", "generated", "the truth the toys are drawn from, instead of --truth: `T` = generated (the generated counts scaled to the data), result (the nominal result: the toys are its refold), tilt-AXIS (the generated counts tilted by --tilt percent along AXIS) or the name of a stress test of the analysis file")
	f.IntVar(&o.toys, "toys", validate.DefaultToys, "number of toys `N`")
	f.IntVar(&o.maxK, "max-iterations", validate.DefaultMaxK, "scan 1..`K` iterations")
	f.Var(flagval.NewChoice(&o.criterion, validate.MinMSE, criterionNames(), validate.Criteria()),
		"criterion", "how the iteration count is recommended: min_mse (smallest summed mean squared error), min_mse_weighted (weighted by 1/truth), bias_below (smallest count whose mean |bias|/sigma is below --bias-threshold)")
	f.Float64Var(&o.threshold, "bias-threshold", validate.DefaultBiasThreshold, "threshold `X` of --criterion bias_below")
	f.Float64Var(&o.tilt, "tilt", validate.DefaultTiltPercent, "size in `PERCENT` of the linear tilts of the stress tests (0: none)")
	f.Uint64Var(&o.seed, "seed", 1, "random seed `S` of the toys; the same seed gives the same bits")
	f.Var(flagval.NewByteSize(&o.memoryLimit, unfold.DefaultMemoryLimit), "memory-limit", "memory allowed for each unfolding, e.g. 8GiB")
	f.StringVar(&o.out, "out", "", "validation folder `DIR` to create")
	f.BoolVar(&o.force, "force", false, "replace DIR if it holds an earlier validation (or is empty)")
	return cmd
}

func criterionNames() []string {
	var n []string
	for _, c := range validate.Criteria() {
		n = append(n, string(c))
	}
	return n
}

// validateAnalysisFlags are the flags that apply with an analysis file.
var validateAnalysisFlags = map[string]bool{"truth": true, "toy-truth": true, "toys": true, "max-iterations": true, "criterion": true, "bias-threshold": true, "tilt": true, "seed": true, "out": true, "force": true}

func (o *validateOptions) checkValidate(cmd *cobra.Command, args []string) error {
	o.flags = cmd.Flags()
	if o.out == "" {
		return usagef("validate needs --out DIR; see \"desmear validate --help\"")
	}
	if len(args) == 1 {
		var wrong []string
		cmd.Flags().Visit(func(f *pflag.Flag) {
			if !validateAnalysisFlags[f.Name] && cmd.LocalNonPersistentFlags().Lookup(f.Name) != nil {
				wrong = append(wrong, "--"+f.Name)
			}
		})
		if len(wrong) > 0 {
			return usagef("%v cannot be combined with an analysis file: the inputs and settings come from %s", wrong, args[0])
		}
	} else if o.response == "" || o.generated == "" || o.data == "" {
		return usagef("validate needs --response, --generated and --data (or an analysis file as the only argument); see \"desmear validate --help\"")
	}
	switch {
	case o.flags.Changed("iterations") && o.iterations < 1:
		return usagef("--iterations %d: give at least 1 iteration", o.iterations)
	case o.truth != "" && o.flags.Changed("toy-truth"):
		return usagef("give either --truth T.csv or --toy-truth, not both")
	}
	return o.checkToys()
}

// checkToys refuses the options of a toy ensemble that cannot be run:
// fewer than two toys, no iteration to scan, a tilt outside [0, 100)
// percent, a bias threshold that is not positive (or NaN). "desmear
// validate" and the plan of a toy ensemble ("desmear batch plan --toys")
// both check them here.
func (o *validateOptions) checkToys() error {
	switch {
	case o.toys < 2:
		return usagef("--toys %d: give at least 2", o.toys)
	case o.maxK < 1:
		return usagef("--max-iterations %d: give at least 1", o.maxK)
	case !(o.tilt >= 0 && o.tilt < 100):
		return usagef("--tilt %v: give a size in [0, 100) percent", o.tilt)
	case !(o.threshold > 0):
		return usagef("--bias-threshold %v: give a number > 0", o.threshold)
	}
	return nil
}

// validation is what a validation needs, from either front end.
type validation struct {
	prob     *unfold.Problem
	settings *unfold.Settings
	method   *bayes.Settings
	truth    *binning.Scheme
	// stress are the stress tests of the analysis file.
	stress []validate.NamedWeights
	// locate places an error of the unfolding in the inputs.
	locate func(error) error
}

func runValidate(ctx context.Context, g *globalOptions, o *validateOptions, args []string) error {
	if err := refusedFolder(validate.CheckFolder(o.out, o.force), o.out, "validation folder", validate.JSONFile); err != nil {
		return err
	}
	var v *validation
	var err error
	if len(args) == 1 {
		v, err = loadValidationAnalysis(ctx, g, args[0])
	} else {
		v, err = loadValidationPlain(ctx, o)
	}
	if err != nil {
		return err
	}
	opt, err := v.options(o)
	if err != nil {
		return err
	}
	p := newProgress(g)
	p.unit = "toys"
	defer p.finish()
	opt.Progress = func(done, total int) { p.report("toys", int64(done), int64(total)) }
	start := time.Now()
	rep, err := validate.Validate(ctx, v.prob, v.settings, opt)
	p.finish()
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return v.locate(err)
	}
	v.label(rep)
	if err := writeValidation(o.out, o.force, rep); err != nil {
		return err
	}
	if !g.quiet {
		fmt.Fprintf(g.stderr, "desmear: validation with %d toys done in %.1f s\n", o.toys, time.Since(start).Seconds())
	}
	w := bufio.NewWriter(g.stdout)
	printValidation(w, o.out, rep)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}

// writeValidation writes the validation folder out of rep, replacing an
// earlier validation folder (or an empty one) only when force is set, as
// "desmear validate" and the merge of a toy plan both do.
func writeValidation(out string, force bool, rep *validate.Report) error {
	if err := validate.WriteFolder(out, force, validate.Program{Name: "desmear", Version: version}, rep); err != nil {
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
			return refusedFolder(err, out, "validation folder", validate.JSONFile)
		}
		return ioErr(fmt.Errorf("writing %s: %w", out, err))
	}
	return nil
}

// label names the truth bins of rep (when there is a truth binning).
func (v *validation) label(rep *validate.Report) {
	if v.truth != nil {
		for j := range rep.Truth {
			rep.Labels = append(rep.Labels, v.truth.Label(j))
		}
	}
}

// options are the validation options of o for v.
func (v *validation) options(o *validateOptions) (*validate.Options, error) {
	opt := &validate.Options{
		Method:  v.method.WithIterations,
		Nominal: v.method, MaxK: o.maxK, Toys: o.toys, Seed: o.seed,
		Criterion: o.criterion, Threshold: o.threshold, Weights: v.stress,
	}
	if v.truth != nil && o.tilt > 0 {
		opt.TiltScheme, opt.TiltPercent = v.truth, o.tilt
	}
	if o.truth != "" {
		t, err := tables.LoadVector(o.truth, tables.Prior)
		if err != nil {
			return nil, inputErr(fmt.Errorf("--truth: %w", err))
		}
		if opt.Truth, _, err = t.Dense(len(v.prob.Generated), "the response's truth bins"); err != nil {
			return nil, inputErr(fmt.Errorf("--truth: %w", err))
		}
		opt.TruthSource = o.truth
	} else if err := v.toyTruth(o, opt); err != nil {
		return nil, err
	}
	return opt, nil
}

// loadValidationAnalysis loads the analysis file and assembles its
// problem (building the response and filling the data as "desmear
// unfold" does).
func loadValidationAnalysis(ctx context.Context, g *globalOptions, path string) (*validation, error) {
	a, err := analysis.Load(path)
	if err != nil {
		return nil, analysisErr(err)
	}
	s, m, err := a.Settings()
	if err != nil {
		return nil, analysisErr(err)
	}
	b, ok := m.(*bayes.Settings)
	if ok {
		b.Scan = false // the toys need no iteration scan of their own
	}
	if !ok {
		return nil, usagef("%s: the iteration scan applies to the iterative method (%s), not to %s", path, bayes.Name, m.Name())
	}
	p := newProgress(g)
	_, prob, err := a.Assemble(ctx, &analysis.Options{Progress: p.report, Version: version})
	p.finish()
	if err != nil {
		return nil, analysisErr(err)
	}
	v := &validation{prob: prob, settings: s, method: b, truth: a.Truth, locate: func(err error) error {
		return analysisErr(err)
	}}
	for _, st := range a.Stress {
		v.stress = append(v.stress, validate.NamedWeights{Name: st.Name, Weights: st.Weights})
	}
	return v, nil
}

// loadValidationPlain reads the plain tables as "desmear unfold" does.
func loadValidationPlain(ctx context.Context, o *validateOptions) (*validation, error) {
	o.method = bayes.Name
	pi, err := loadPlain(&o.unfoldOptions)
	if err != nil {
		return nil, err
	}
	z := pi.sizes(&o.unfoldOptions)
	if err := checkSizes(z, o.memoryLimit); err != nil {
		return nil, err
	}
	prob, err := pi.set.Assemble(z)
	if err != nil {
		return nil, inputErr(err)
	}
	s, m := o.settings(pi.truth)
	s.Covariance = unfold.Diagonal
	return &validation{prob: prob, settings: s, method: m.(*bayes.Settings), truth: pi.truth, locate: func(err error) error {
		return o.kernelErr(&pi.set, err)
	}}, nil
}

// toyTruth sets the toys' truth of --toy-truth in opt.
func (v *validation) toyTruth(o *validateOptions, opt *validate.Options) error {
	name := o.toyTruth
	var w []float64
	switch {
	case name == "" || name == "generated":
		return nil
	case name == "result":
		opt.TruthFromResult = true
		return nil
	case strings.HasPrefix(name, "tilt-"):
		if v.truth == nil {
			return usagef("--toy-truth %s: a tilt needs a truth binning (--truth-binning)", name)
		}
		pct := o.tilt
		if pct == 0 {
			pct = validate.DefaultTiltPercent
		}
		var err error
		if w, err = validate.Tilt(v.truth, strings.TrimPrefix(name, "tilt-"), pct); err != nil {
			return usagef("--toy-truth %s: %v (axes: %s)", name, strings.TrimPrefix(err.Error(), "validate: "), strings.Join(v.truth.AxisNames(), ", "))
		}
		name = fmt.Sprintf("%s-%+g%%", name, pct)
	default:
		var names []string
		for _, st := range v.stress {
			if st.Name == name {
				w = st.Weights
			}
			names = append(names, st.Name)
		}
		if w == nil {
			list := "it has none"
			if len(names) > 0 {
				list = "it has " + strings.Join(names, ", ")
			}
			return usagef("--toy-truth %q: not generated, result, tilt-AXIS or a stress test of the analysis file (validation.stress; %s)", name, list)
		}
	}
	t, err := validate.Reweighted(v.prob, w)
	if err != nil {
		return inputErr(fmt.Errorf("--toy-truth %s: %w", name, err))
	}
	opt.Truth, opt.TruthSource = t, name
	return nil
}

// printValidation prints the scan and the recommendation.
func printValidation(w io.Writer, dir string, r *validate.Report) {
	fmt.Fprintf(w, "validation: %s (%d toys from the %s truth)\n", dir, r.Toys, r.TruthSource)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "k\tmse\t± toys\tmean |bias|/sigma\tcoverage mean\tmin\t\n")
	for _, p := range r.Scan {
		mark := ""
		if p.K == r.Recommended {
			mark = " <"
		}
		fmt.Fprintf(tw, "%d\t%.5g\t%.2g\t%.3f\t%.3f\t%.3f\t%s\n", p.K, p.MSE, p.MSEError, p.BiasOverSigma, p.CoverageMean, p.CoverageMin, mark)
	}
	tw.Flush()
	rec := r.Recommendation
	fmt.Fprintf(w, "recommended iterations: %d (criterion %s", r.Recommended, rec.Criterion)
	if rec.Criterion == validate.BiasBelow {
		fmt.Fprintf(w, " < %g", rec.Threshold)
		if !rec.Met {
			fmt.Fprint(w, ", not met by any scanned count: the smallest value")
		}
	}
	fmt.Fprintln(w, ")")
	for _, c := range append(append([]*validate.Check(nil), r.Closure...), r.Stress...) {
		fmt.Fprintf(w, "%s: chi2/ndf = %.3g/%d (per-bin uncertainties, correlations ignored), largest |pull| %.3g (bin %d)", c.Name, c.Chi2, c.NDF, c.MaxPull, c.MaxPullBin)
		if c.Nominal != nil {
			fmt.Fprintf(w, "; against the nominal result chi2/ndf = %.3g/%d", c.Nominal.Chi2, c.Nominal.NDF)
		}
		fmt.Fprintln(w)
	}
}

// chooseIterations is --iterations auto: it runs the toy scan
// (validate.Choose), sets the chosen count in m and returns the record of
// the choice.
func chooseIterations(ctx context.Context, g *globalOptions, prob *unfold.Problem, s *unfold.Settings, m unfold.Method, seed uint64) (*validate.Choice, error) {
	b, ok := m.(*bayes.Settings)
	if !ok {
		return nil, usagef("--iterations auto applies to the iterative method (%s) only", bayes.Name)
	}
	p := newProgress(g)
	p.unit = "toys"
	defer p.finish()
	ch, err := validate.Choose(ctx, prob, s, b.WithIterations, seed, func(done, total int) {
		p.report("choosing the iterations", int64(done), int64(total))
	})
	if err != nil {
		return nil, err
	}
	b.Iterations = ch.K
	if !g.quiet {
		fmt.Fprintf(g.stderr, "desmear: %d iterations chosen (smallest %s of 1..%d on %d toys)\n", ch.K, ch.Criterion, ch.MaxIterations, ch.Toys)
	}
	return ch, nil
}
