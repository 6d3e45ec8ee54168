package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"
	"github.com/spf13/pflag"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/cmd/desmear/internal/flagval"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/methods"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/binbybin"
	"github.com/desmear/desmear/unfold/methods/inversion"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
	"github.com/desmear/desmear/unfold/result"
	"github.com/desmear/desmear/unfold/validate"
)

// unfoldOptions are the options of "desmear unfold" in plain-table mode.
type unfoldOptions struct {
	flags *pflag.FlagSet // set by check, for the messages naming flags

	response, generated, data, background, prior string
	compare                                      string
	truthBinning, recoBinning                    string
	rootSliceAxis                                string

	method        string
	iterations    int
	autoIter      bool // --iterations auto
	stopChi2      float64
	maxIterations int
	bgMode        unfold.BackgroundMode
	smooth        float64
	tau           float64
	tauCriterion  tikhonov.Criterion
	penalty       tikhonov.Penalty
	widths        bool
	bias          tikhonov.Bias
	covariance    unfold.CovarianceMode
	diagonal      unfold.DiagonalMethod
	probes, toys  int
	respSamples   int
	samplingPrior unfold.SamplingPrior
	biasToys      int
	varianceFrom  unfold.VarianceSource
	seed          uint64
	memoryLimit   int64
	negative      unfold.NegativeCells
	unexplained   unfold.Unexplained

	out      string
	force    bool
	formats  []string
	noReport bool
}

// tableFlags are the flags that name plain-table inputs; they cannot be
// combined with an analysis file.
var tableFlags = []string{"response", "generated", "data", "background", "prior", "truth-binning", "reco-binning", "compare"}

// testHook, when set by a test, is called at named stages of the
// plain-table run ("loaded", "unfolded", "written").
var testHook func(ctx context.Context, stage string)

func hook(ctx context.Context, stage string) {
	if testHook != nil {
		testHook(ctx, stage)
	}
}

func newUnfoldCommand(g *globalOptions) *cobra.Command {
	var o unfoldOptions
	cmd := &cobra.Command{
		Use:   "unfold (ANALYSIS.yaml | --response A.csv --generated G.csv --data n.csv --out DIR [flags])",
		Short: "Unfold measured data (iterative Bayesian method by default; Tikhonov, inversion, bin-by-bin)",
		Long: `unfold corrects a measured (reco-level) spectrum for resolution, acceptance
and efficiency with the D'Agostini iterative Bayesian method (EM for Poisson
data), on a sparse response matrix over global bin indices, and writes a
result folder.

It runs in one of two modes:

  desmear unfold ANALYSIS.yaml
      the whole job from an analysis file (simulated events, data, binning).

  desmear unfold --response A.csv --generated G.csv --data n.csv --out DIR
      from plain tables that another framework produced. Each table is a CSV
      file with a header row; lines starting with # are comments; indices are
      0-based global bin indices:
        A.csv  reco,truth,value[,sumw2]   response: weighted count generated in
                                          truth bin j and reconstructed in reco bin i
        G.csv  truth,value[,sumw2]        generated count per truth bin,
                                          reconstructed or not
        n.csv  reco,value[,variance]      data (variance defaults to the count)
        b.csv  reco,value[,variance]      expected background (--background)
        p.csv  truth,value                prior shape (--prior; default: G)
      Without binning files the numbers of bins are 1 + the largest index in
      the tables; with --truth-binning/--reco-binning they are the schemes'
      sizes, and larger indices are errors.

The result folder DIR holds result.json (estimate, uncertainty, covariance with
--covariance full, efficiency, iteration history, settings, input files with
their SHA-256) and result.csv (one row per truth bin); with --truth-binning
also region-NAME.csv (per truth region: bin edges, volume, counts and
densities, i.e. counts per bin volume) and result.root (histograms of counts
and densities), the same files an analysis file's output.formats chooses
from (--formats). It is written to a temporary folder and renamed into place,
so a failed or interrupted run leaves nothing behind; an existing DIR is
refused unless --force is given (and even then only an earlier result folder
or an empty folder is replaced).

The iteration stops after --iterations K (default 4), or at the first
iteration whose chi-square between successive estimates,
  chi2(k) = sum_j eps_j (mu_j(k) - mu_j(k-1))^2 / mu_j(k),
is at most --stop-chi2, within --max-iterations.

--method tikhonov minimises chi2 + tau^2 |L x|^2 with L the second
differences along each axis of the truth binning (along the global index
without --truth-binning); tau is fixed with --tau or chosen with
--tau-criterion lcurve (the default) or correlation, and the scan is
written to tau-scan.csv. --method inversion is unregularised least
squares; --method bin-by-bin applies correction factors (a biased
shortcut, same truth and reco binning only). See "desmear help method".`,
		Example: `  desmear unfold --response A.csv --generated G.csv --data n.csv --out result
  desmear unfold --response A.csv --generated G.csv --data n.csv --background b.csv \
      --iterations 6 --covariance full --out result --force
  desmear unfold --response A.csv --generated G.csv --data n.csv \
      --truth-binning truth.yaml --reco-binning reco.yaml --stop-chi2 0.5 --out result
  desmear unfold analysis.yaml`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if len(args) == 1 {
				if err := checkAnalysisFlags(cmd, args[0]); err != nil {
					return err
				}
				return runAnalysisUnfold(cmd.Context(), g, args[0], o.force, o.noReport)
			}
			if err := o.check(cmd); err != nil {
				return err
			}
			return runUnfold(cmd.Context(), g, &o)
		},
	}
	f := cmd.Flags()
	o.tableFlags(f)
	f.Var(flagval.NewChoice(&o.method, methods.Default, methods.Names(), methods.Names()),
		"method", "the unfolding method: dagostini (the D'Agostini iterative Bayesian method), tikhonov (regularised least squares), inversion (unregularised least squares), bin-by-bin (correction factors, a biased shortcut)")
	f.Var(flagval.NewCountOrAuto(&o.iterations, &o.autoIter), "iterations", "fixed number of iterations `K` (default 4 unless --stop-chi2 is given), or auto: the count of smallest mean squared error on toys (see \"desmear help validation\")")
	f.Float64Var(&o.stopChi2, "stop-chi2", 0, "stop at the first iteration whose chi-square between successive estimates is at most `X`")
	f.IntVar(&o.maxIterations, "max-iterations", 0, "with --stop-chi2: at most `K` iterations (default 100)")
	f.Float64Var(&o.tau, "tau", 0, "with --method tikhonov: a fixed regularisation strength `X` > 0 (default: chosen by --tau-criterion)")
	f.Var(flagval.NewEnum(&o.tauCriterion, tikhonov.LCurve, tikhonov.Criteria()),
		"tau-criterion", "with --method tikhonov: how tau is chosen from a scan: lcurve (maximum curvature of the L-curve) or correlation (minimum average global correlation)")
	f.Var(flagval.NewEnum(&o.penalty, tikhonov.Curvature, tikhonov.Penalties()),
		"penalty", "with --method tikhonov: the derivative penalised along each axis of the truth binning (along the truth index without one): curvature (second differences) or slope (first differences)")
	f.BoolVar(&o.widths, "divide-by-widths", false, "with --method tikhonov: penalise the densities (estimate / bin volume) with differences divided by the distances of the bin centres (needs --truth-binning)")
	f.Var(flagval.NewEnum(&o.bias, tikhonov.NoBias, tikhonov.Biases()),
		"bias", "with --method tikhonov: the spectrum the penalty pulls towards: zero, or prior (the prior scaled to the data, the iterative method's starting point)")
	f.Var(flagval.NewEnum(&o.negative, unfold.RefuseNegative, unfold.NegativeCellsModes()),
		"negative-cells", "migration cells of negative weight: refuse (listing them), or clip them to zero (each clipped cell and the weight removed are reported and recorded in result.json)")
	f.Var(flagval.NewEnum(&o.unexplained, unfold.RefuseUnexplained, unfold.UnexplainedModes()),
		"unexplained", "data in reco bins that no truth bin reaches and no background explains: refuse (listing every such bin with its count and the fraction of the data), or drop those bins (reported and recorded in result.json)")
	f.Var(flagval.NewEnum(&o.bgMode, unfold.InModel, unfold.BackgroundModes()),
		"background-mode", "model: the background stays in the folded expectation (estimates stay non-negative); subtract: data minus background is unfolded (negative differences set to 0)")
	f.Float64Var(&o.smooth, "smooth", 0, "smooth the estimate between iterations with strength `W` in (0,1] along each axis of the truth binning, within regions (needs --truth-binning; default: no smoothing)")
	f.Var(flagval.NewEnum(&o.covariance, unfold.Diagonal, unfold.CovarianceModes()),
		"covariance", "data-statistical uncertainty: none; diag (per-bin uncertainties); full (also the covariance matrix, linearised through every iteration)")
	f.Var(flagval.NewEnum(&o.diagonal, unfold.DiagonalAuto, unfold.DiagonalMethods()),
		"diagonal-method", "how --covariance diag is computed: exact (dense Jacobian), probes (random probe vectors), toys (Poisson pseudo-data), gamma (samples of the data expectation from the Gamma posterior of each count), auto (exact when it fits in --memory-limit, else probes)")
	f.IntVar(&o.probes, "probes", 0, "number of random probes `N` for --diagonal-method probes or auto (default 100: about 7% precision on each uncertainty)")
	f.IntVar(&o.toys, "toys", 0, "number of Poisson pseudo-data sets or Gamma samples `N` for --diagonal-method toys or gamma (default 500)")
	f.IntVar(&o.respSamples, "response-samples", 0, "the simulation's statistical uncertainty from `N` responses sampled from the Dirichlet posterior of each column (needs the sumw2 column of G.csv); 0: off")
	f.Var(flagval.NewEnum(&o.samplingPrior, unfold.NoSamplingPrior, unfold.SamplingPriors()),
		"sampling-prior", "prior of --response-samples and --diagonal-method gamma: none (the samples' mean is the measured response or data) or flat (+1 on every non-empty cell and the inefficiency cell, +1 on each count)")
	f.Var(flagval.NewEnum(&o.varianceFrom, unfold.FromCounts, unfold.VarianceSources()),
		"variance-from", "the data variance of the linearised propagation: counts (the observed n) or expectation (the folded expectation nu of the estimate, which does not collapse where the estimate is driven towards zero)")
	f.IntVar(&o.biasToys, "bias-toys", 0, "estimate the bias of the result on `N` toys drawn from the result refolded, at the chosen regularisation (a model-dependent estimate, not a correction; default 0: off)")
	f.Uint64Var(&o.seed, "seed", 1, "random seed `S` of the probes, toys and samples; the same seed gives the same bits")
	f.Var(flagval.NewByteSize(&o.memoryLimit, unfold.DefaultMemoryLimit), "memory-limit", "memory allowed for the unfolding, e.g. 8GiB or 500MB: problems whose vectors would not fit (about 256 bytes per bin) and a full covariance above it are refused")
	f.StringVar(&o.out, "out", "", "result folder `DIR` to create")
	f.BoolVar(&o.force, "force", false, "replace DIR if it holds an earlier result (or is empty)")
	f.StringSliceVar(&o.formats, "formats", result.DefaultFormats(), formatsUsage())
	f.StringVar(&o.rootSliceAxis, "root-slice-axis", "", "axis `NAME` of the truth binning along which result.root's slice histograms run (regions without it: their last axis; default the last axis of each region)")
	f.BoolVar(&o.noReport, "no-report", false, "write no plots and no report.html (the report format; \"desmear report DIR\" writes them later)")
	return cmd
}

// tableFlags registers the flags of the plain-table inputs (tableFlags).
func (o *unfoldOptions) tableFlags(f *pflag.FlagSet) {
	f.StringVar(&o.response, "response", "", "response table `A.csv` (reco,truth,value[,sumw2])")
	f.StringVar(&o.generated, "generated", "", "generated-count table `G.csv` (truth,value[,sumw2])")
	f.StringVar(&o.data, "data", "", "data table `n.csv` (reco,value[,variance])")
	f.StringVar(&o.background, "background", "", "expected-background table `b.csv` (reco,value[,variance]); default: none")
	f.StringVar(&o.prior, "prior", "", "prior table `p.csv` (truth,value), only its shape matters; default: the generated counts")
	f.StringVar(&o.compare, "compare", "", "reference table `T.csv` (truth,value): print and store the pulls and the chi-square of the result against it (comparison.csv, result.json comparison)")
	f.StringVar(&o.truthBinning, "truth-binning", "", "truth binning scheme `T.yaml`: fixes the number of truth bins, adds bin labels and edges to the result")
	f.StringVar(&o.recoBinning, "reco-binning", "", "reco binning scheme `R.yaml`: fixes the number of reco bins")
}

// analysisFlags are the unfold flags that apply with an analysis file;
// every other setting comes from the file.
var analysisFlags = []string{"force", "no-report"}

// checkAnalysisFlags refuses the plain-table flags with an analysis file:
// the table inputs because they contradict it, and the settings because
// the analysis file holds them (a flag silently ignored would mislead).
func checkAnalysisFlags(cmd *cobra.Command, path string) error {
	var tablesGiven, settingsGiven []string
	cmd.LocalNonPersistentFlags().VisitAll(func(f *pflag.Flag) {
		switch {
		case !f.Changed, slices.Contains(analysisFlags, f.Name):
		case slices.Contains(tableFlags, f.Name):
			tablesGiven = append(tablesGiven, "--"+f.Name)
		default:
			settingsGiven = append(settingsGiven, "--"+f.Name)
		}
	})
	if len(tablesGiven) > 0 {
		return usagef("give either an analysis file or the plain tables, not both: %s cannot be combined with %s", strings.Join(tablesGiven, ", "), path)
	}
	if len(settingsGiven) > 0 {
		return usagef("%s cannot be combined with an analysis file: the settings come from %s (only %s applies)", strings.Join(settingsGiven, ", "), path, "--"+strings.Join(analysisFlags, ", --"))
	}
	if strings.EqualFold(filepath.Ext(path), ".csv") {
		return usagef("%s looks like a plain table, not an analysis file (YAML); to unfold from plain tables give them with flags: desmear unfold --response A.csv --generated G.csv --data n.csv --out DIR", path)
	}
	return nil
}

// check validates the plain-table options.
func (o *unfoldOptions) check(cmd *cobra.Command) error {
	var missing []string
	for _, req := range []struct{ flag, val string }{{"response", o.response}, {"generated", o.generated}, {"data", o.data}, {"out", o.out}} {
		if req.val == "" {
			missing = append(missing, "--"+req.flag)
		}
	}
	if len(missing) > 0 {
		return usagef("unfold needs %s (or an analysis file as the only argument); see \"desmear unfold --help\"", strings.Join(missing, ", "))
	}
	o.flags = cmd.Flags()
	changed := o.flags.Changed
	// The ranges of the values are checked by the settings' validators
	// (below); here only what the command line adds: an explicit 0
	// (the libraries' "default") and flags given in the wrong mode.
	switch {
	case changed("iterations") && o.iterations == 0 && !o.autoIter:
		return usagef("--iterations 0: give at least 1 iteration")
	case changed("iterations") && changed("stop-chi2"):
		return usagef("give either --iterations or --stop-chi2, not both")
	case changed("stop-chi2") && o.stopChi2 == 0:
		return usagef("--stop-chi2 0: give a threshold > 0 (or a fixed number with --iterations)")
	case changed("max-iterations") && !changed("stop-chi2"):
		return usagef("--max-iterations applies only with --stop-chi2 (use --iterations for a fixed number)")
	case changed("max-iterations") && o.maxIterations == 0:
		return usagef("--max-iterations 0: give a positive number")
	case changed("smooth") && o.smooth <= 0:
		return usagef("--smooth %v: give a strength in (0, 1]", o.smooth)
	case o.smooth > 0 && o.truthBinning == "":
		return usagef("--smooth needs --truth-binning (smoothing follows the axes and regions of the truth binning)")
	case changed("tau") && o.tau <= 0:
		return usagef("--tau %v: give a tau > 0 (or leave it out to choose tau with --tau-criterion)", o.tau)
	case changed("tau") && changed("tau-criterion"):
		return usagef("give either --tau (a fixed tau) or --tau-criterion (to choose it), not both")
	case o.rootSliceAxis != "" && o.truthBinning == "":
		return usagef("--root-slice-axis needs --truth-binning (the slices follow the axes of the truth binning)")
	case o.widths && o.truthBinning == "":
		return usagef("--divide-by-widths needs --truth-binning (the widths are those of the truth bins)")
	case changed("background-mode") && o.background == "":
		return usagef("--background-mode needs --background")
	case changed("diagonal-method") && o.covariance != unfold.Diagonal:
		return usagef("--diagonal-method applies only to --covariance diag")
	case changed("probes") && (o.covariance != unfold.Diagonal || o.diagonal == unfold.DiagonalExact || o.diagonal == unfold.DiagonalToys || o.diagonal == unfold.DiagonalGamma):
		return usagef("--probes applies only to --covariance diag with --diagonal-method probes or auto")
	case changed("probes") && o.probes == 0:
		return usagef("--probes 0: give at least 2")
	case changed("toys") && (o.covariance != unfold.Diagonal || o.diagonal != unfold.DiagonalToys && o.diagonal != unfold.DiagonalGamma):
		return usagef("--toys applies only to --covariance diag --diagonal-method toys or gamma")
	case changed("sampling-prior") && o.respSamples == 0 && (o.covariance != unfold.Diagonal || o.diagonal != unfold.DiagonalGamma):
		return usagef("--sampling-prior applies only with --response-samples N or --diagonal-method gamma")
	case changed("toys") && o.toys == 0:
		return usagef("--toys 0: give at least 2")
	}
	if err := o.checkMethodFlags(); err != nil {
		return err
	}
	s, m := o.settings(nil)
	if b, ok := m.(*bayes.Settings); ok && b.Smoothing != nil {
		// The truth binning is read later; the unfolding checks it.
		b.Smoothing.Neighbours = noBins{}
	}
	if _, err := s.Resolve(); err != nil {
		return o.flagErr(err)
	}
	return o.flagErr(m.Validate())
}

// checkMethodFlags refuses a flag of one method's own settings given
// with another method.
func (o *unfoldOptions) checkMethodFlags() error {
	var fields []string
	for field := range settingFlags {
		fields = append(fields, field)
	}
	slices.Sort(fields)
	for _, field := range fields {
		flag := settingFlags[field]
		if owner := methods.Owner(field); owner != "" && owner != o.method && o.flags.Changed(flag) {
			return usagef("--%s applies only to --method %s (the method is %s)", flag, owner, o.method)
		}
	}
	return nil
}

// noBins stands for the truth binning when the settings are checked
// before it is read.
type noBins struct{}

func (noBins) Len() int                       { return 0 }
func (noBins) InRange() int                   { return 0 }
func (noBins) Neighbours(int, int) (int, int) { return -1, -1 }

// settingFlags maps the fields of unfold.Settings and of the methods'
// settings to their flags.
var settingFlags = map[string]string{
	"Iterations":      "iterations",
	"StopChi2":        "stop-chi2",
	"MaxIterations":   "max-iterations",
	"Smoothing":       "smooth",
	"Tau":             "tau",
	"Criterion":       "tau-criterion",
	"Penalty":         "penalty",
	"Widths":          "divide-by-widths",
	"Bias":            "bias",
	"Background":      "background-mode",
	"Covariance":      "covariance",
	"DiagonalMethod":  "diagonal-method",
	"Probes":          "probes",
	"Toys":            "toys",
	"ResponseSamples": "response-samples",
	"SamplingPrior":   "sampling-prior",
	"Seed":            "seed",
	"MemoryLimit":     "memory-limit",
	"BiasToys":        "bias-toys",
	"VarianceFrom":    "variance-from",
	"NegativeCells":   "negative-cells",
	"Unexplained":     "unexplained",
}

// flagErr turns an *unfold.SettingsError into a usage error naming the
// flag and its value; other errors (and nil) are returned unchanged.
func (o *unfoldOptions) flagErr(err error) error {
	var se *unfold.SettingsError
	if !errors.As(err, &se) {
		return err
	}
	name, ok := settingFlags[se.Field]
	if !ok || o.flags == nil || o.flags.Lookup(name) == nil {
		return usageErr(err)
	}
	return usagef("--%s %s: %s", name, o.flags.Lookup(name).Value, se.Reason)
}

// settings returns the common settings of the options and the method
// with its own settings.
func (o *unfoldOptions) settings(truth *binning.Scheme) (*unfold.Settings, unfold.Method) {
	s := &unfold.Settings{
		Background:      o.bgMode,
		Covariance:      o.covariance,
		DiagonalMethod:  o.diagonal,
		Probes:          o.probes,
		Toys:            o.toys,
		ResponseSamples: o.respSamples,
		SamplingPrior:   o.samplingPrior,
		Seed:            o.seed,
		MemoryLimit:     o.memoryLimit,
		BiasToys:        o.biasToys,
		VarianceFrom:    o.varianceFrom,
		NegativeCells:   o.negative,
		Unexplained:     o.unexplained,
	}
	switch o.method {
	case bayes.Name:
		m := &bayes.Settings{
			Iterations:    o.iterations,
			StopChi2:      o.stopChi2,
			MaxIterations: o.maxIterations,
			Scan:          slices.Contains(o.formats, result.IterationsFormat),
		}
		if o.smooth > 0 {
			m.Smoothing = &bayes.Smoothing{Neighbours: truth, Strength: o.smooth}
		}
		return s, m
	case tikhonov.Name:
		return s, &tikhonov.Settings{Tau: o.tau, Criterion: o.tauCriterion, Penalty: o.penalty, Widths: o.widths, Bias: o.bias, Truth: truth}
	case inversion.Name:
		return s, &inversion.Settings{}
	case binbybin.Name:
		return s, &binbybin.Settings{}
	}
	panic("desmear: the method choice let through an unknown method " + o.method)
}

// checkOutFolder refuses a result folder that exists (unless force) or
// that cannot be replaced, before any long work.
func checkOutFolder(dir string, force bool) error {
	return refusedFolder(result.Check(dir, force), dir, "result folder", result.JSONFile)
}

// refusedFolder classifies an error of checking or writing the output
// folder dir, a "result folder", "response bundle" or "tables folder"
// (what) whose earlier versions hold the file marker: a folder that
// exists without --force, or that is not an earlier one of its kind, is
// a usage error with advice; anything else an I/O error (nil stays nil).
func refusedFolder(err error, dir, what, marker string) error {
	switch {
	case err == nil:
		return nil
	case errors.Is(err, result.ErrExists):
		return usagef("%s %s exists (use --force to replace it, or choose another folder)", what, dir)
	case errors.Is(err, result.ErrNotResult):
		return usagef("%s exists and is not an earlier %s (it does not hold a %s); refusing to replace it even with --force: choose another folder", dir, what, marker)
	}
	return ioErr(fmt.Errorf("%s %s: %w", what, dir, err))
}

// openInput opens an input file, classifying a missing file as bad input
// and any other failure as an I/O error.
func openInput(what, path string) (*os.File, error) {
	f, err := os.Open(path)
	switch {
	case err == nil:
		return f, nil
	case errors.Is(err, fs.ErrNotExist):
		return nil, inputErr(fmt.Errorf("%s %s does not exist", what, path))
	case errors.Is(err, fs.ErrPermission):
		return nil, inputErr(fmt.Errorf("%s %s cannot be read: permission denied", what, path))
	}
	return nil, ioErr(fmt.Errorf("%s: %w", what, err))
}

// readHashed opens path, lets read parse it through a hashing reader and
// returns the input record. Errors from read that are not *tables.Error
// or *binning.Error are I/O errors.
func readHashed(role, what, path string, read func(r io.Reader) error) (inputs.File, error) {
	f, err := openInput(what, path)
	if err != nil {
		return inputs.File{}, err
	}
	defer f.Close()
	h := inputs.NewHashingReader(f)
	if err := read(h); err != nil {
		var te *tables.Error
		var be *binning.Error
		if errors.As(err, &te) || errors.As(err, &be) {
			return inputs.File{}, inputErr(err)
		}
		return inputs.File{}, ioErr(fmt.Errorf("%s: %w", what, err))
	}
	in, err := h.File(role, path)
	if err != nil {
		return inputs.File{}, ioErr(fmt.Errorf("%s: %w", what, err))
	}
	return in, nil
}

// plainInputs is everything read for a plain-table run.
type plainInputs struct {
	set         tables.Set
	compare     *tables.Vector // the reference of --compare, nil without
	truth, reco *binning.Scheme
	inputs      []inputs.File
}

func loadPlain(o *unfoldOptions) (*plainInputs, error) {
	var pi plainInputs
	add := func(in inputs.File, err error) error {
		if err == nil {
			pi.inputs = append(pi.inputs, in)
		}
		return err
	}
	scheme := func(role, path string, dst **binning.Scheme) error {
		if path == "" {
			return nil
		}
		return add(readHashed(role, role, path, func(r io.Reader) (err error) {
			*dst, err = binning.Decode(r, path)
			return err
		}))
	}
	if err := scheme("truth-binning", o.truthBinning, &pi.truth); err != nil {
		return nil, err
	}
	if err := scheme("reco-binning", o.recoBinning, &pi.reco); err != nil {
		return nil, err
	}
	if o.rootSliceAxis != "" {
		if _, err := result.SlicesAlong(pi.truth, o.rootSliceAxis); err != nil {
			return nil, usagef("--root-slice-axis: %v", err)
		}
	}
	if err := add(readHashed("response", "response table", o.response, func(r io.Reader) (err error) {
		pi.set.Response, err = tables.ReadResponse(r, o.response)
		return err
	})); err != nil {
		return nil, err
	}
	for _, t := range []struct {
		path string
		kind tables.Kind
		dst  **tables.Vector
	}{
		{o.generated, tables.Generated, &pi.set.Generated},
		{o.data, tables.Data, &pi.set.Data},
		{o.background, tables.Background, &pi.set.Background},
		{o.prior, tables.Prior, &pi.set.Prior},
		{o.compare, tables.Prior, &pi.compare},
	} {
		if t.path == "" {
			continue
		}
		role := t.kind.String()
		if t.dst == &pi.compare {
			role = "compare"
		}
		if err := add(readHashed(role, role+" table", t.path, func(r io.Reader) (err error) {
			*t.dst, err = tables.ReadVector(r, t.path, t.kind)
			return err
		})); err != nil {
			return nil, err
		}
	}
	return &pi, nil
}

// sizes returns the problem sizes: the schemes' when given, else those
// found in the tables.
func (pi *plainInputs) sizes(o *unfoldOptions) tables.Sizes {
	z := pi.set.Sizes()
	if pi.truth != nil {
		z.Truth, z.TruthOrigin = pi.truth.Len(), "the truth binning "+o.truthBinning
	}
	if pi.reco != nil {
		z.Reco, z.RecoOrigin = pi.reco.Len(), "the reco binning "+o.recoBinning
	}
	return z
}

// bytesPerBin is a generous estimate of the memory one truth or reco bin
// costs a plain-table run (the kernel's vectors, the probes' share, the
// result and its files), measured at about 110 bytes with no uncertainty.
const bytesPerBin = 256

// checkSizes refuses sizes whose vectors alone would not fit in the
// memory limit, before anything that large is allocated: a mistyped
// index in a tiny table (1000000000 for 1000) would otherwise make the
// run exhaust the machine's memory.
func checkSizes(z tables.Sizes, limit int64) error {
	need := int64(z.Truth+z.Reco) * bytesPerBin
	if need <= limit || need <= 64<<20 {
		return nil // fits, or small enough for any machine
	}
	origin := func(o string) string {
		if o == "" {
			return "1 + the largest index in the tables"
		}
		return o
	}
	return numericalErr(fmt.Errorf("%d truth bins (%s) and %d reco bins (%s) need about %d MB, above the memory limit of %d MB; check the indices of the tables, or raise --memory-limit",
		z.Truth, origin(z.TruthOrigin), z.Reco, origin(z.RecoOrigin), need>>20, limit>>20))
}

// kernelErr says where an error of unfold.Unfold comes from: an input
// error at the table file and line, a settings error at its flag, and
// the flags to change when the memory limit is too small. exitCode
// classifies the result.
func (o *unfoldOptions) kernelErr(set *tables.Set, err error) error {
	var ie *unfold.InputError
	var tl *unfold.TooLargeError
	switch {
	case errors.As(err, &ie):
		return set.Locate(err)
	case errors.As(err, &tl):
		return fmt.Errorf("%w (on the command line: --covariance diag, or a larger --memory-limit)", err)
	}
	return o.flagErr(err)
}

// formatsUsage is the help of --formats, naming the registered formats.
func formatsUsage() string {
	var binned []string
	for _, name := range result.Formats() {
		if result.NeedsTruthBinning(name) {
			binned = append(binned, name)
		}
	}
	return fmt.Sprintf("comma-separated `LIST` of the result folder's formats, among %s (%s is always written; %s only with --truth-binning)",
		strings.Join(result.Formats(), ", "), result.JSONFile, strings.Join(binned, ", "))
}

func runUnfold(ctx context.Context, g *globalOptions, o *unfoldOptions) error {
	if err := result.CheckFormats(o.formats); err != nil {
		return usagef("--formats: %v", err)
	}
	if err := checkOutFolder(o.out, o.force); err != nil {
		return err
	}
	if o.noReport {
		o.formats = withoutReport(o.formats)
	}
	pi, err := loadPlain(o)
	if err != nil {
		return err
	}
	z := pi.sizes(o)
	if err := checkSizes(z, o.memoryLimit); err != nil {
		return err
	}
	prob, err := pi.set.Assemble(z)
	if err != nil {
		return inputErr(err)
	}
	var ref []float64
	if pi.compare != nil {
		if ref, _, err = pi.compare.Dense(z.Truth, z.TruthOrigin); err != nil {
			return inputErr(err)
		}
	}
	hook(ctx, "loaded")
	if err := ctx.Err(); err != nil {
		return err
	}

	settings, method := o.settings(pi.truth)
	var recoLabel, truthLabel unfold.Labels
	if pi.reco != nil {
		recoLabel = pi.reco.Label
	}
	if pi.truth != nil {
		truthLabel = pi.truth.Label
	}
	prob, remedies, err := unfold.Remedy(prob, settings, recoLabel, truthLabel)
	if err != nil {
		return o.kernelErr(&pi.set, remedyAdvice(err, "--negative-cells clip", "--unexplained drop"))
	}
	printRemedies(g, remedies, recoLabel, truthLabel)
	var choice *validate.Choice
	if o.autoIter {
		if choice, err = chooseIterations(ctx, g, prob, settings, method, o.seed); err != nil {
			return o.kernelErr(&pi.set, err)
		}
	}
	if b, err := unfold.FullCovarianceBytes(prob, settings); err == nil && b >= 64<<20 {
		fmt.Fprintf(g.stderr, "note: the full covariance takes about %.0f MB of memory (dense Jacobian and covariance matrix)\n", float64(b)/1e6)
	}
	res, err := unfold.Unfold(ctx, prob, settings, method)
	if err != nil {
		return o.kernelErr(&pi.set, err)
	}
	var bias *validate.Bias
	if settings.BiasToys > 0 {
		p := newProgress(g)
		p.unit = "toys"
		bias, err = validate.EstimateBias(ctx, prob, settings, method, res, func(done, total int) {
			p.report("estimating the bias", int64(done), int64(total))
		})
		p.finish()
		if err != nil {
			return o.kernelErr(&pi.set, err)
		}
	}
	hook(ctx, "unfolded")

	r, err := result.FromUnfold(res)
	if err != nil {
		return numericalErr(err)
	}
	r.SetProblem(prob)
	r.Program = result.Program{Name: "desmear", Version: version}
	r.Inputs = pi.inputs
	prior := "generated"
	if o.prior != "" {
		prior = "table"
	}
	r.Settings = result.DescribeSettings(settings, method, prior, o.background != "")
	r.Settings.IterationsChosen = choice
	r.SetBias(bias)
	if !remedies.Empty() {
		r.Remedies = remedies
	}
	if pi.truth != nil {
		r.TruthBinning = result.DescribeBinning(pi.truth, o.truthBinning)
		r.SliceAxis = o.rootSliceAxis
	}
	if pi.reco != nil {
		r.RecoBinning = result.DescribeBinning(pi.reco, o.recoBinning)
	}
	if ref != nil {
		if err := r.Compare(res, ref, o.compare, pi.truth); err != nil {
			return numericalErr(err)
		}
	}

	var files []string
	if err := writeResultFolder(ctx, o.out, o.force, func(f *result.Folder) (err error) {
		files, err = result.Write(f, r, pi.truth, o.formats)
		return err
	}); err != nil {
		return err
	}
	printSummary(g, o.out, r, res.Details, pi.truth, files)
	if zeros := zeroPrior(prob.Prior, r.Determined); zeros > 0 && !g.quiet && o.method == bayes.Name {
		fmt.Fprintf(g.stderr, "note: the prior %s is 0 in %d truth bins the response can measure; the iteration keeps a zero, so their estimates are 0 (give every such bin a positive prior)\n", o.prior, zeros)
	}
	return nil
}

// zeroPrior counts the determined truth bins with a zero prior.
func zeroPrior(prior []float64, det []bool) int {
	n := 0
	for j, p := range prior {
		if p == 0 && det[j] {
			n++
		}
	}
	return n
}

// writeResultFolder writes a result folder atomically: it creates the
// folder, calls write to add the files, and commits unless write fails
// or ctx is cancelled, in which case nothing is left behind. Errors are
// classified for the exit code.
func writeResultFolder(ctx context.Context, dir string, force bool, write func(f *result.Folder) error) error {
	f, err := result.New(dir, force)
	if err != nil {
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
			return checkOutFolder(dir, force)
		}
		return ioErr(fmt.Errorf("output folder: %w", err))
	}
	defer f.Abort()
	if err := write(f); err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return ioErr(fmt.Errorf("writing %s: %w", dir, err))
	}
	hook(ctx, "written")
	if err := ctx.Err(); err != nil {
		return err
	}
	if err := f.Commit(); err != nil {
		if errors.Is(err, result.ErrExists) {
			return usagef("output folder %s appeared while the result was being written; nothing was replaced", dir)
		}
		return ioErr(fmt.Errorf("writing %s: %w", dir, err))
	}
	return nil
}

// maxTableRows is the largest number of truth bins whose per-bin table
// "desmear unfold" prints (in both modes); larger results point to the
// result files.
const maxTableRows = 30

// stopSummary says how many iterations were made and how the iteration
// stopped (result.json's stopped_by), for the terminal summaries.
func stopSummary(iterations int, stoppedBy string, stopChi2 float64) string {
	why := ""
	switch stoppedBy {
	case bayes.StoppedByIterations:
		why = "the fixed number"
	case bayes.StoppedByChi2:
		why = fmt.Sprintf("chi-square below %g", stopChi2)
	case bayes.StoppedByMaxIterations:
		why = fmt.Sprintf("maximum reached; chi-square still above %g", stopChi2)
	default:
		return fmt.Sprintf("%d iterations", iterations)
	}
	return fmt.Sprintf("%d iterations (stopped by %s: %s)", iterations, stoppedBy, why)
}

// methodSummary says what a method other than the iterative one did,
// from its details (the kernel result's Details), for the terminal
// summaries; "" for the iterative method (see stopSummary).
func methodSummary(details any) string {
	switch d := details.(type) {
	case *tikhonov.Details:
		how := "fixed"
		switch d.Criterion {
		case tikhonov.ChosenLCurve:
			how = "chosen by the L-curve"
		case tikhonov.ChosenCorrelation:
			how = "chosen by the minimum average global correlation"
		}
		if d.AtScanEdge {
			how += ", at the edge of the scan: the optimum may lie outside it"
		}
		return fmt.Sprintf("tikhonov, tau = %.4g (%s)", d.Tau, how)
	case *inversion.Details:
		return fmt.Sprintf("inversion, condition number %.4g", d.Condition)
	case *binbybin.Details:
		return "bin-by-bin factors (a biased shortcut: for contrast only)"
	}
	return ""
}

// printSummary prints what was done to stdout, with a per-bin table for
// small problems, and notes to stderr. Of the files written it names
// result.json and result.csv.
func printSummary(g *globalOptions, dir string, r *result.Result, details any, truth *binning.Scheme, files []string) {
	det := 0
	for _, d := range r.Determined {
		if d {
			det++
		}
	}
	how := "in " + stopSummary(r.Iterations, r.StoppedBy, r.Settings.StopChi2)
	if m := methodSummary(details); m != "" {
		how = "with " + m
	}
	w := g.stdout
	fmt.Fprintf(w, "unfolded %d reco bins into %d truth bins (%d determined) %s\n", r.RecoBins, r.TruthBins, det, how)
	if r.TruthBins <= maxTableRows {
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		head := "bin\testimate\t"
		if r.Uncertainty != nil {
			head += "uncertainty\t"
		}
		if truth != nil {
			head += "  label"
		}
		fmt.Fprintln(tw, head)
		for j := range r.Estimate {
			line := fmt.Sprintf("%d\t%.6g\t", j, r.Estimate[j])
			if !r.Determined[j] {
				line = fmt.Sprintf("%d\t(not determined)\t", j)
				if r.Uncertainty != nil {
					line += "\t"
				}
			} else if r.Uncertainty != nil {
				line += fmt.Sprintf("%.3g\t", r.Uncertainty[j])
			}
			if truth != nil {
				line += "  " + truth.Label(j)
			}
			fmt.Fprintln(tw, line)
		}
		tw.Flush()
	}
	var tables []string
	for _, name := range []string{result.JSONFile, result.CSVFile} {
		if slices.Contains(files, name) {
			tables = append(tables, dir+"/"+name)
		}
	}
	fmt.Fprintf(w, "result: %s\n", strings.Join(tables, ", "))
	printComparison(w, r, truth)
	printChecks(w, dir, r, files)
	printBinNotes(g, r, truth, "--diagonal-method toys")
	if g.quiet {
		return
	}
	if len(r.ClippedRecoBins) > 0 {
		fmt.Fprintf(g.stderr, "note: in %d reco bins the data minus the background was negative and was set to 0 (listed in result.json)\n", len(r.ClippedRecoBins))
	}
	if r.UncertaintyPrecision > 0 {
		kind := "toys"
		switch {
		case strings.Contains(r.UncertaintyMethod, "probes"):
			kind = "probes"
		case strings.Contains(r.UncertaintyMethod, "gamma"):
			kind = "Gamma samples of the data"
		}
		fmt.Fprintf(g.stderr, "note: uncertainties estimated with %d %s; relative precision of each variance about %.0f%%\n", r.UncertaintySamples, kind, 100*r.UncertaintyPrecision)
	}
	for _, src := range r.Sources {
		if src.Name == unfold.SourceSimulation {
			fmt.Fprintf(g.stderr, "note: the simulation's statistical uncertainty from %d sampled responses (relative precision of each of its variances about %.0f%%) is added to the data's\n", src.Samples, 100*src.Precision)
		}
	}
}

// printBinNotes prints to stderr, in both modes, the note on the truth
// bins not determined by the data and the warning on the bins whose
// linearised uncertainty collapsed (result.Collapsed), naming them and
// the remedies (toys is how the mode asks for toys).
func printBinNotes(g *globalOptions, r *result.Result, truth *binning.Scheme, toys string) {
	if g.quiet {
		return
	}
	det := 0
	for _, d := range r.Determined {
		if d {
			det++
		}
	}
	if r.TruthBins > det {
		fmt.Fprintf(g.stderr, "note: %d truth bins have no response entries (efficiency 0) and are not determined; they are flagged in result.json and hold 0\n", r.TruthBins-det)
	}
	if len(r.CollapsedBins) == 0 {
		return
	}
	var names []string
	for _, j := range r.CollapsedBins {
		if len(names) == 10 {
			names = append(names, fmt.Sprintf("… %d in all, listed in result.json collapsed_bins", len(r.CollapsedBins)))
			break
		}
		name := strconv.Itoa(j)
		if truth != nil {
			name += " " + truth.Label(j)
		}
		names = append(names, name)
	}
	fmt.Fprintf(g.stderr, "warning: in %d truth bins the estimate fell below %g of its start and its uncertainty below the Poisson sqrt(estimate): the linearised uncertainty collapses with the estimate there (bins %s); check them with toys (%s) or the variance from the expectation (desmear help method, §24)\n",
		len(r.CollapsedBins), result.CollapseFall, strings.Join(names, "; "), toys)
}

// remedyAdvice replaces in an error of unfold.Remedy the words naming
// the remedies with the front end's own (flags or keys).
func remedyAdvice(err error, negative, unexplained string) error {
	var ie *unfold.InputError
	if !errors.As(err, &ie) {
		return err
	}
	c := *ie
	c.Reason = strings.NewReplacer(unfold.NegativeCellsAdvice, negative, unfold.UnexplainedAdvice, unexplained).Replace(c.Reason)
	return &c
}

// printRemedies reports on stderr, one line each, what the remedies
// changed: every clipped cell with its value and the weight removed,
// every dropped reco bin with its count and the fraction of the data.
func printRemedies(g *globalOptions, r *unfold.Remedies, reco, truth unfold.Labels) {
	if r.Empty() || g.quiet {
		return
	}
	label := func(l unfold.Labels, b int) string {
		if l == nil {
			return strconv.Itoa(b)
		}
		return fmt.Sprintf("%d (%s)", b, l(b))
	}
	if n := len(r.ClippedCells); n > 0 {
		cells := make([]string, n)
		for k, c := range r.ClippedCells {
			cells[k] = fmt.Sprintf("reco %s × truth %s: %.6g", label(reco, c.Reco), label(truth, c.Truth), c.Value)
		}
		fmt.Fprintf(g.stderr, "desmear: note: clipped %d negative migration cells to zero, %.6g of weight removed: %s\n", n, r.ClippedWeight, strings.Join(cells, ", "))
	}
	if n := len(r.Dropped); n > 0 {
		bins := make([]string, n)
		for k, d := range r.Dropped {
			bins[k] = fmt.Sprintf("%s: %.6g", label(reco, d.Reco), d.Count)
		}
		fmt.Fprintf(g.stderr, "desmear: note: dropped the data of %d reco bins that no truth bin reaches, %.6g in all (%.3g%% of the data): %s\n", n, r.DroppedCount, 100*r.DroppedFraction, strings.Join(bins, ", "))
	}
}

// printComparison prints the comparison of r with its reference
// spectrum (nothing without one): the pulls per compared bin for up to
// maxTableRows bins, and the chi-square with how it was computed.
func printComparison(w io.Writer, r *result.Result, truth *binning.Scheme) {
	if r == nil || r.Comparison == nil {
		return
	}
	c := r.Comparison
	fmt.Fprintf(w, "comparison with %s (%d truth bins):\n", c.Reference, len(c.Bins))
	if len(c.Bins) <= maxTableRows {
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		head := "bin\treference\testimate\tpull\t"
		if truth != nil {
			head += "  label"
		}
		fmt.Fprintln(tw, head)
		for k, j := range c.Bins {
			pull := "-"
			if c.Pull[k] != nil {
				pull = fmt.Sprintf("%+.2f", *c.Pull[k])
			}
			line := fmt.Sprintf("%d\t%.6g\t%.6g\t%s\t", j, c.Values[k], r.Estimate[j], pull)
			if truth != nil {
				line += "  " + truth.Label(j)
			}
			fmt.Fprintln(tw, line)
		}
		tw.Flush()
	}
	fmt.Fprintln(w, comparisonChi2(c))
}

// comparisonChi2 says what the chi-square of a comparison is and how it
// was computed (method.md §19).
func comparisonChi2(c *result.Comparison) string {
	if c.Covariance == "none" {
		return "no chi-square: the result has no uncertainty (pull = (estimate - reference) / uncertainty)"
	}
	what := "the total covariance"
	if c.Covariance == "diagonal" {
		what = "the total uncertainties only (no full covariance: correlations ignored)"
	}
	cond := "singular"
	if c.Condition != nil {
		cond = fmt.Sprintf("%.3g", *c.Condition)
	}
	ratio := "-"
	if c.NDF > 0 {
		ratio = fmt.Sprintf("%.2f", c.Chi2/float64(c.NDF))
	}
	return fmt.Sprintf("chi2/ndf = %.1f/%d = %s (p-value %.2f) with %s through its pseudo-inverse: eigenvalues below %.0e of the largest dropped, %d of %d directions kept (condition number %s)",
		c.Chi2, c.NDF, ratio, c.PValue, what, c.EigenvalueCut, c.NDF, c.Determined, cond)
}
