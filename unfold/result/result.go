package result

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/binbybin"
	"github.com/desmear/desmear/unfold/methods/inversion"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/validate"
)

// Format and FormatVersion identify result.json files of this layout.
// FormatVersion grows when a field changes meaning or disappears; new
// fields may be added without changing it.
const (
	Format        = "desmear-result"
	FormatVersion = 1
)

// Result is the schema of result.json. Arrays over truth bins have one
// entry per global truth bin (flow bins included). No number is NaN or
// infinite: bins the response cannot measure are flagged false in
// Determined and carry 0 in Estimate, Uncertainty and Covariance.
//
// It is the one result document of both modes: the fields after
// RecoBinning are filled by an analysis run only (from its analysis
// file, its response and its data) and are left out of the JSON when
// empty, so that a plain-table result holds exactly the fields above
// them. Readers must ignore fields they do not know.
type Result struct {
	Format        string        `json:"format"`         // always Format
	FormatVersion int           `json:"format_version"` // FormatVersion
	Program       Program       `json:"program"`
	Inputs        []inputs.File `json:"inputs"` // every input file, with its content hash
	Settings      Settings      `json:"settings"`

	TruthBins int `json:"truth_bins"`
	RecoBins  int `json:"reco_bins"`

	// Estimate is the unfolded expected count per truth bin.
	Estimate []float64 `json:"estimate"`
	// Uncertainty is the square root of the total variance of each
	// estimate, summed over Sources; absent with covariance "none".
	Uncertainty []float64 `json:"uncertainty,omitempty"`
	// UncertaintyMethod is "linearised" (exact first-order propagation
	// through every iteration), "linearised-probes" (the same, estimated
	// with random probes) or "poisson-toys"; absent without uncertainty.
	UncertaintyMethod string `json:"uncertainty_method,omitempty"`
	// UncertaintyPrecision is the relative statistical precision of each
	// variance (0 for the exact propagation); UncertaintySamples the
	// number of probes or toys.
	UncertaintyPrecision float64 `json:"uncertainty_precision,omitempty"`
	UncertaintySamples   int     `json:"uncertainty_samples,omitempty"`
	// Covariance is the total covariance (the sum of the sources'
	// covariances) as an array of rows; only with covariance "full".
	Covariance [][]float64 `json:"covariance,omitempty"`
	// CovarianceCondition is the condition number of the total
	// covariance over the determined truth bins, the ratio of its largest
	// to its smallest eigenvalue (null when singular; method.md §19);
	// only with a covariance.
	CovarianceCondition *float64 `json:"covariance_condition_number,omitempty"`
	// CollapsedBins lists the determined truth bins whose linearised
	// uncertainty collapsed with the estimate (see Collapsed).
	CollapsedBins []int `json:"collapsed_bins,omitempty"`
	// Sources is the breakdown of the uncertainty by source: "data" (the
	// data's statistics, described by the uncertainty fields above),
	// "simulation" (the statistics of the simulation behind the
	// response) and one entry per systematic variation.
	Sources []Source `json:"sources,omitempty"`
	// Bias is the toy estimate of the bias of the estimate, when asked
	// for (settings.bias_toys): a model-dependent estimate, not a
	// correction.
	Bias *Bias `json:"bias,omitempty"`
	// SliceAxis names the axis along which the ROOT file's slice
	// histograms run (see SlicesAlong); empty: the last axis of each
	// region.
	SliceAxis string `json:"root_slice_axis,omitempty"`
	// Derived lists the derived quantities asked for (projections,
	// densities, normalised shapes; see Derived), each written as its own
	// table.
	Derived []Derived `json:"derived,omitempty"`
	// Comparison compares the result with a reference spectrum, when
	// one was given.
	Comparison *Comparison `json:"comparison,omitempty"`
	// RandomStreams records how the random numbers behind the
	// uncertainty were drawn; absent when none were (an exact
	// computation).
	RandomStreams *RandomStreams `json:"random_streams,omitempty"`
	// Determined flags the truth bins the response can measure
	// (efficiency > 0).
	Determined []bool `json:"determined"`
	// Efficiency is eps_j = Σ_i A_ij / G_j.
	Efficiency []float64 `json:"efficiency"`
	// Folded is the expected reco spectrum of the estimate, R μ + b.
	Folded []float64 `json:"folded"`
	// ClippedRecoBins lists the reco bins where data minus background
	// was negative and set to 0 (background mode "subtract").
	ClippedRecoBins []int `json:"clipped_reco_bins,omitempty"`

	// Iterations is the number of iterations made; Converged reports
	// that the stop-chi2 criterion was met (false with a fixed number,
	// kept for readers of format version 1); StoppedBy says how the
	// iteration stopped: "iterations" (the fixed number was made), "chi2"
	// (the stopping chi-square was met) or "max_iterations" (the bound
	// was reached first).
	Iterations int    `json:"iterations"`
	Converged  bool   `json:"converged"`
	StoppedBy  string `json:"stopped_by,omitempty"`
	History    []Step `json:"history"`

	// Generated is G_j, the simulated count generated per truth bin, and
	// Prior the prior as given (absent when it is Generated); both set
	// by SetProblem.
	Generated []float64 `json:"generated,omitempty"`
	Prior     []float64 `json:"prior,omitempty"`
	// Data is n_i per reco bin as given and DataVariance its variance
	// (n_i for Poisson data); Background and BackgroundVariance the
	// expected background and its variance (absent without one). All
	// set by SetProblem.
	Data               []float64 `json:"data,omitempty"`
	DataVariance       []float64 `json:"data_variance,omitempty"`
	Background         []float64 `json:"background,omitempty"`
	BackgroundVariance []float64 `json:"background_variance,omitempty"`
	// FoldedChi2 is Σ_i (n_i − ν_i)² / (var n_i + var b_i) over the
	// FoldedBins reco bins of positive variance (see Pulls); set by
	// SetProblem.
	FoldedChi2 float64 `json:"folded_chi2,omitempty"`
	FoldedBins int     `json:"folded_bins,omitempty"`
	// Migrations is the migration matrix A_ij of the problem (not part of
	// result.json); the diagnostics write it as a table when it is small
	// enough (MaxResponseCells).
	Migrations *sparse.Matrix `json:"-"`
	// Tikhonov, Inversion and BinByBin are the outcomes of those methods
	// (absent for the others).
	// Scan is the iteration scan of the iterative method when it was
	// asked for (the "iterations" format; not part of result.json).
	Scan      *IterationScan `json:"-"`
	Tikhonov  *Tikhonov      `json:"tikhonov,omitempty"`
	Inversion *Inversion     `json:"inversion,omitempty"`
	BinByBin  *BinByBin      `json:"bin_by_bin,omitempty"`

	// TruthBinning and RecoBinning describe the binning schemes when
	// they were given.
	TruthBinning *Binning `json:"truth_binning,omitempty"`
	RecoBinning  *Binning `json:"reco_binning,omitempty"`

	// Analysis names the analysis file.
	Analysis *Analysis `json:"analysis,omitempty"`
	// Purity and Stability per truth bin (on the truth binning; see
	// package response); null where not defined.
	Purity    []*float64 `json:"purity,omitempty"`
	Stability []*float64 `json:"stability,omitempty"`
	// Density is the estimate divided by the bin volume (and by the
	// integrated luminosity when given), per truth bin; 0 for flow bins
	// (see Densities). DensityUncertainty is the uncertainty divided
	// alike.
	Density            []float64 `json:"density,omitempty"`
	DensityUncertainty []float64 `json:"density_uncertainty,omitempty"`
	Luminosity         float64   `json:"luminosity,omitempty"`
	LuminosityUnit     string    `json:"luminosity_unit,omitempty"`
	// ResponseSummary counts the simulated events.
	ResponseSummary *response.Summary `json:"response_summary,omitempty"`
	// DataEvents, DataSelected and DataOutside count the data events
	// (events files only).
	DataEvents   int64 `json:"data_events,omitempty"`
	DataSelected int64 `json:"data_selected,omitempty"`
	DataOutside  int64 `json:"data_outside,omitempty"`
	// DataOutsideContent is the data content left out in flows the reco
	// binning switches off, DataOutsideFraction its fraction of the data
	// read; both absent when nothing was left out.
	DataOutsideContent  *float64 `json:"data_outside_content,omitempty"`
	DataOutsideFraction *float64 `json:"data_outside_fraction,omitempty"`
	// Remedies lists what the remedies of the settings changed (clipped
	// negative cells, dropped reco bins); absent when nothing.
	Remedies *unfold.Remedies `json:"remedies,omitempty"`
	// Warnings are notes on the inputs, one line each.
	Warnings []string `json:"warnings,omitempty"`
}

// Source is one contribution to the uncertainty (see unfold.Source):
// its name, how it was obtained, its uncertainty per truth bin and, with
// covariance "full" when it was computed, its covariance.
type Source struct {
	Name        string      `json:"name"`
	Method      string      `json:"method"`
	Uncertainty []float64   `json:"uncertainty"`
	Covariance  [][]float64 `json:"covariance,omitempty"`
	Precision   float64     `json:"precision,omitempty"`
	Samples     int         `json:"samples,omitempty"`
	// Shift is the signed shift per truth bin of a systematic variation
	// (the varied estimate minus the nominal one, or the half-difference
	// of an up/down pair, whose one-sided shifts are ShiftUp and
	// ShiftDown); absent for the statistical sources.
	Shift     []float64 `json:"shift,omitempty"`
	ShiftUp   []float64 `json:"shift_up,omitempty"`
	ShiftDown []float64 `json:"shift_down,omitempty"`
}

// RandomStreams says where the random numbers of a result come from:
// unit k of each kind (probe, toy or sample number k, from 0) draws from
// the generator seeded with (Seed, Offset + k).
type RandomStreams struct {
	Generator string   `json:"generator"` // "pcg (go math/rand/v2)"
	Seed      uint64   `json:"seed"`
	Streams   []Stream `json:"streams"`
}

// Stream is one kind of unit of RandomStreams.
type Stream struct {
	Unit       string `json:"unit"` // "probe", "poisson-toy", "gamma-sample", "response-sample" or "replica"
	Offset     uint64 `json:"offset"`
	Derivation string `json:"derivation"` // for example "response-sample k (from 0) draws from rand.NewPCG(seed, 4·2^32 + k)"
}

// Bias is the bias estimate of a result: per truth bin the mean of the
// toys' estimates minus the result, the toys drawn from the result
// refolded and unfolded at the regularisation the result chose; Error is
// its toy precision (one standard error). Model-dependent: it takes the
// result as the truth; it is not a correction (method.md §23).
type Bias struct {
	Toys   int       `json:"toys"`
	Seed   uint64    `json:"seed"`
	Truth  string    `json:"truth"`
	Values []float64 `json:"values"`
	Error  []float64 `json:"error"`
}

// SetBias records the bias estimate b (nil: none), with bins not
// determined at 0.
func (r *Result) SetBias(b *validate.Bias) {
	if b == nil {
		r.Bias = nil
		return
	}
	rb := &Bias{Toys: b.Toys, Seed: b.Seed, Truth: "result-refolded", Values: make([]float64, len(r.Estimate)), Error: make([]float64, len(r.Estimate))}
	for j := range rb.Values {
		if r.Determined[j] {
			rb.Values[j], rb.Error[j] = b.Bias[j], b.Error[j]
		}
	}
	r.Bias = rb
}

// Tikhonov is the outcome of the Tikhonov method: the tau used and how
// it was chosen ("fixed", "lcurve" or "correlation"), the penalty, and
// the scan of tau (also written as tau-scan.csv).
type Tikhonov struct {
	Tau          float64    `json:"tau"`
	Criterion    string     `json:"tau_criterion"`
	AtScanEdge   bool       `json:"tau_at_scan_edge,omitempty"`
	Penalty      string     `json:"penalty"`
	Widths       bool       `json:"divide_by_widths"`
	Bias         string     `json:"bias"`
	PenaltyRows  int        `json:"penalty_rows"`
	Solver       string     `json:"solver"`
	CGIterations int        `json:"cg_iterations,omitempty"`
	ResidualNorm float64    `json:"residual_norm"`
	PenaltyNorm  float64    `json:"penalty_norm"`
	Scan         []TauPoint `json:"tau_scan,omitempty"`
	// CorrelationSample is the number of truth bins over which the
	// average global correlation was estimated (absent: exact).
	CorrelationSample int `json:"correlation_sample,omitempty"`
}

// TauPoint is one point of the scan of tau.
type TauPoint struct {
	Tau          float64 `json:"tau"`
	ResidualNorm float64 `json:"residual_norm"`
	PenaltyNorm  float64 `json:"penalty_norm"`
	Curvature    float64 `json:"curvature"`
	Correlation  float64 `json:"average_global_correlation,omitempty"`
	// CorrelationError is the standard error of an estimated Correlation
	// (see Tikhonov.CorrelationSample).
	CorrelationError float64 `json:"correlation_error,omitempty"`
	Converged        bool    `json:"converged"`
	CGIterations     int     `json:"cg_iterations,omitempty"`
}

// Inversion is the outcome of the inversion: the condition number of
// the response.
type Inversion struct {
	Condition float64 `json:"condition_number"`
}

// BinByBin is the outcome of the bin-by-bin correction: its factors and
// the caution that it is a biased shortcut.
type BinByBin struct {
	Caution string    `json:"caution"`
	Factors []float64 `json:"factors"`
}

// Analysis names the analysis file of a result.
type Analysis struct {
	File  string `json:"file"`
	Title string `json:"title,omitempty"`
}

// Program names the program that wrote a result.
type Program struct {
	Name    string `json:"name"`
	Version string `json:"version"`
}

// Settings are the unfolding settings in force, defaults filled in.
type Settings struct {
	// Method names the unfolding method (its Name, e.g. "dagostini").
	Method string `json:"method"`
	// Iterations is the fixed number of iterations; 0 with a stopping rule.
	Iterations int `json:"iterations,omitempty"`
	// IterationsChosen, when the number of iterations was chosen
	// automatically, records how; absent otherwise.
	IterationsChosen *validate.Choice `json:"iterations_chosen,omitempty"`
	// StopChi2 and MaxIterations are the stopping rule, when used.
	StopChi2      float64 `json:"stop_chi2,omitempty"`
	MaxIterations int     `json:"max_iterations,omitempty"`
	// Prior is "generated" (the generated spectrum) or "table" (given).
	Prior string `json:"prior"`
	// Background is "model" or "subtract"; absent without background.
	Background string `json:"background_mode,omitempty"`
	// Smoothing is the smoothing strength; absent without smoothing.
	Smoothing float64 `json:"smoothing,omitempty"`
	// Tau is the fixed tau of the Tikhonov method, TauCriterion the
	// criterion choosing it otherwise ("lcurve" or "correlation"); absent
	// for the other methods. The tau used is in the result's tikhonov.
	Tau          float64 `json:"tau,omitempty"`
	TauCriterion string  `json:"tau_criterion,omitempty"`
	// NegativeCells ("clip") and Unexplained ("drop") are the remedies
	// chosen; absent when refusing (the default).
	NegativeCells string `json:"negative_cells,omitempty"`
	Unexplained   string `json:"unexplained,omitempty"`
	// Covariance is "none", "diag" or "full"; DiagonalMethod the method
	// of "diag": "auto", "exact", "probes" or "toys".
	Covariance     string `json:"covariance"`
	DiagonalMethod string `json:"diagonal_method,omitempty"`
	Probes         int    `json:"probes,omitempty"`
	Toys           int    `json:"toys,omitempty"`
	// ResponseSamples is the number of sampled responses behind the
	// simulation source, SamplingPrior the prior of the Dirichlet and
	// Gamma sampling ("none" or "flat"); absent without sampling.
	ResponseSamples int    `json:"response_samples,omitempty"`
	SamplingPrior   string `json:"sampling_prior,omitempty"`
	// Replicas is the number of Poisson bootstrap replicas of the
	// simulated events behind the simulation source; absent without.
	Replicas int    `json:"replicas,omitempty"`
	Seed     uint64 `json:"seed"`
	// MemoryLimit is the memory limit of the uncertainty computation in
	// bytes.
	MemoryLimit int64 `json:"memory_limit"`
	// BiasToys is the number of toys of the bias estimate (absent: off).
	BiasToys int `json:"bias_toys,omitempty"`
	// VarianceFrom is "expectation" when the linearised propagation used
	// the folded expectation; absent for the observed counts.
	VarianceFrom string `json:"variance_from,omitempty"`
}

// Step is one iteration of the history; iteration 0 is the start.
type Step struct {
	Iteration     int     `json:"iteration"`
	Chi2          float64 `json:"chi2"`
	Change        float64 `json:"change"`
	LogLikelihood float64 `json:"log_likelihood"`
}

// Binning describes a binning scheme: its file, sizes, axes, regions,
// and per global bin a label, its region (index into Regions) and whether
// it is a flow bin. Bin edges are in result.csv (JSON cannot hold the
// infinite edges of flow bins).
type Binning struct {
	File    string   `json:"file,omitempty"`
	Bins    int      `json:"bins"`
	InRange int      `json:"in_range"`
	Axes    []Axis   `json:"axes"`
	Regions []string `json:"regions"`
	Labels  []string `json:"labels"`
	Region  []int    `json:"region"`
	Flow    []bool   `json:"flow"`
}

// Axis names an axis of a binning and its unit.
type Axis struct {
	Name string `json:"name"`
	Unit string `json:"unit,omitempty"`
}

// DescribeBinning returns the description of scheme s read from file.
func DescribeBinning(s *binning.Scheme, file string) *Binning {
	b := &Binning{File: file, Bins: s.Len(), InRange: s.InRange()}
	for _, name := range s.AxisNames() {
		unit, _ := s.AxisUnit(name)
		b.Axes = append(b.Axes, Axis{Name: name, Unit: unit})
	}
	for _, r := range s.Regions() {
		b.Regions = append(b.Regions, r.Name())
	}
	n := s.Len()
	b.Labels = make([]string, n)
	b.Region = make([]int, n)
	b.Flow = make([]bool, n)
	for g := 0; g < n; g++ {
		bin := s.Bin(g)
		b.Labels[g] = s.Label(g)
		b.Region[g] = bin.Region
		b.Flow[g] = bin.Flow
	}
	return b
}

// DescribeSettings returns the settings in force for the common
// settings s (nil means the defaults) and the method m (nil means the
// default method with its defaults), as their Resolve methods fill them
// in. prior says where the prior came from
// ("generated" or "table"); withBackground whether a background was
// given. Settings that do not resolve are described as given.
//
// Each method has one case here: the keys of its own settings.
func DescribeSettings(s *unfold.Settings, m unfold.Method, prior string, withBackground bool) Settings {
	z, err := s.Resolve()
	if err != nil && s != nil {
		z = *s
	}
	if m == nil {
		m = (*bayes.Settings)(nil)
	}
	d := Settings{Method: m.Name(), Prior: prior, Covariance: z.Covariance.String(), Seed: z.Seed, MemoryLimit: z.MemoryLimit, BiasToys: z.BiasToys}
	if z.NegativeCells != unfold.RefuseNegative {
		d.NegativeCells = z.NegativeCells.String()
	}
	if z.Unexplained != unfold.RefuseUnexplained {
		d.Unexplained = z.Unexplained.String()
	}
	switch m := m.(type) {
	case *bayes.Settings:
		b, err := m.Resolve()
		if err != nil && m != nil {
			b = *m
		}
		d.Iterations, d.StopChi2, d.MaxIterations = b.Iterations, b.StopChi2, b.MaxIterations
		if b.Smoothing != nil {
			d.Smoothing = b.Smoothing.Strength
		}
	case *tikhonov.Settings:
		var t tikhonov.Settings
		if m != nil {
			t = *m
		}
		if t.Tau > 0 {
			d.Tau = t.Tau
		} else {
			d.TauCriterion = t.Criterion.String()
		}
	}
	if withBackground {
		d.Background = z.Background.String()
	}
	if z.VarianceFrom != unfold.FromCounts && z.Covariance != unfold.NoCovariance {
		d.VarianceFrom = z.VarianceFrom.String()
	}
	if z.Covariance == unfold.Diagonal {
		d.DiagonalMethod = z.DiagonalMethod.String()
		switch z.DiagonalMethod {
		case unfold.DiagonalAuto, unfold.DiagonalProbes:
			d.Probes = z.Probes
		case unfold.DiagonalToys, unfold.DiagonalGamma:
			d.Toys = z.Toys
		}
	}
	if z.ResponseSamples > 0 {
		d.ResponseSamples = z.ResponseSamples
	}
	d.Replicas = z.Replicas
	if z.ResponseSamples > 0 || z.Covariance == unfold.Diagonal && z.DiagonalMethod == unfold.DiagonalGamma {
		d.SamplingPrior = z.SamplingPrior.String()
	}
	return d
}

// FromUnfold fills the estimate, uncertainty, covariance, efficiency,
// iteration and history fields of a new Result from the kernel's result,
// with Format and FormatVersion set. Bins not determined get 0. It
// returns an error if any number is NaN or infinite (which valid inputs
// never produce). Program, Inputs, Settings and the binnings are left
// for the caller.
func FromUnfold(res *unfold.Result) (*Result, error) {
	nt := len(res.Estimate)
	r := &Result{
		Format: Format, FormatVersion: FormatVersion,
		TruthBins:            nt,
		RecoBins:             len(res.Folded),
		Estimate:             make([]float64, nt),
		Determined:           make([]bool, nt),
		Efficiency:           make([]float64, nt),
		Folded:               slices.Clone(res.Folded),
		ClippedRecoBins:      res.Clipped,
		UncertaintyMethod:    res.UncertaintyMethod,
		UncertaintyPrecision: res.UncertaintyPrecision,
		UncertaintySamples:   res.Samples,
	}
	if len(res.Streams) > 0 {
		r.RandomStreams = &RandomStreams{Generator: "pcg (go math/rand/v2)", Seed: res.Seed}
		for _, st := range res.Streams {
			d := st.Derivation
			if d == "" {
				d = fmt.Sprintf("%s k (from 0) draws from rand.NewPCG(seed, %d·2^32 + k)", st.Unit, st.Offset>>32)
			}
			r.RandomStreams.Streams = append(r.RandomStreams.Streams, Stream{Unit: st.Unit, Offset: st.Offset, Derivation: d})
		}
	}
	// Each method has one case here: the fields of its details.
	switch d := res.Details.(type) {
	case *bayes.Details:
		r.Iterations, r.Converged, r.StoppedBy = d.Iterations, d.Converged, d.StoppedBy
		r.History = make([]Step, len(d.History))
		for k, s := range d.History {
			r.History[k] = Step{Iteration: s.Iteration, Chi2: s.Chi2, Change: s.Change, LogLikelihood: s.LogLikelihood}
		}
	case *tikhonov.Details:
		r.Tikhonov = &Tikhonov{Tau: d.Tau, Criterion: d.Criterion, AtScanEdge: d.AtScanEdge, Penalty: d.Penalty, Widths: d.Widths, Bias: d.Bias,
			PenaltyRows: d.PenaltyRows, Solver: d.Solver, CGIterations: d.CGIterations, ResidualNorm: d.ResidualNorm, PenaltyNorm: d.PenaltyNorm, CorrelationSample: d.CorrelationSample}
		for _, p := range d.Scan {
			r.Tikhonov.Scan = append(r.Tikhonov.Scan, TauPoint{Tau: p.Tau, ResidualNorm: p.ResidualNorm, PenaltyNorm: p.PenaltyNorm, Curvature: p.Curvature, Correlation: p.Correlation, CorrelationError: p.CorrelationError, Converged: p.Converged, CGIterations: p.Iterations})
		}
	case *inversion.Details:
		r.Inversion = &Inversion{Condition: d.Condition}
	case *binbybin.Details:
		r.BinByBin = &BinByBin{Caution: d.Caution, Factors: slices.Clone(d.Factors)}
	}
	r.Scan = newIterationScan(res.StepEstimates, res.StepVariance, res.Determined)
	copy(r.Determined, res.Determined)
	copy(r.Efficiency, res.Efficiency)
	for j := range r.Estimate {
		if r.Determined[j] {
			r.Estimate[j] = res.Estimate[j]
		}
	}
	if res.Uncertainty != nil {
		r.Uncertainty = make([]float64, nt)
		for j := range r.Uncertainty {
			if r.Determined[j] {
				r.Uncertainty[j] = res.Uncertainty[j]
			}
		}
	}
	r.Covariance = denseRows(res.Covariance, r.Determined)
	if res.Covariance != nil {
		var det []int
		for j, d := range r.Determined {
			if d {
				det = append(det, j)
			}
		}
		// A matrix that is not a covariance (refused by any chi-square
		// with it) gets no condition number.
		if e, err := unfold.Decompose(res.Covariance, det, 0); err == nil && !math.IsInf(e.Condition, 0) {
			r.CovarianceCondition = &e.Condition
		}
	}
	for _, src := range res.Sources {
		s := Source{Name: src.Name, Method: src.Method, Uncertainty: make([]float64, nt),
			Covariance: denseRows(src.Covariance, r.Determined), Precision: src.Precision, Samples: src.Samples}
		for j, v := range src.Variance {
			if r.Determined[j] && v > 0 {
				s.Uncertainty[j] = math.Sqrt(v)
			}
		}
		s.Shift, s.ShiftUp, s.ShiftDown = determinedOnly(src.Shift, r.Determined), determinedOnly(src.Up, r.Determined), determinedOnly(src.Down, r.Determined)
		r.Sources = append(r.Sources, s)
	}
	if err := r.checkFinite(); err != nil {
		return nil, err
	}
	return r, nil
}

// determinedOnly returns a copy of v with 0 in the bins not determined
// (nil for a nil v).
func determinedOnly(v []float64, determined []bool) []float64 {
	if v == nil {
		return nil
	}
	out := make([]float64, len(v))
	for j, x := range v {
		if determined[j] {
			out[j] = x
		}
	}
	return out
}

// denseRows returns c as an array of rows with the rows and columns of
// bins not determined set to 0, or nil for a nil c.
func denseRows(c *mat.SymDense, determined []bool) [][]float64 {
	if c == nil {
		return nil
	}
	nt := c.SymmetricDim()
	rows := make([][]float64, nt)
	for i := range rows {
		row := make([]float64, nt)
		if determined[i] {
			for j := range row {
				if determined[j] {
					row[j] = c.At(i, j)
				}
			}
		}
		rows[i] = row
	}
	return rows
}

// finiteRows returns an error naming the first NaN or infinity of rows.
func finiteRows(name string, rows [][]float64) error {
	for i, row := range rows {
		for j, v := range row {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("result: %s[%d][%d] is %v", name, i, j, v)
			}
		}
	}
	return nil
}

// checkFinite returns an error naming the first NaN or infinity.
func (r *Result) checkFinite() error {
	type named struct {
		name string
		v    []float64
	}
	vecs := []named{{"estimate", r.Estimate}, {"uncertainty", r.Uncertainty}, {"efficiency", r.Efficiency}, {"folded", r.Folded},
		{"generated", r.Generated}, {"prior", r.Prior}, {"data", r.Data}, {"data_variance", r.DataVariance},
		{"background", r.Background}, {"background_variance", r.BackgroundVariance}, {"folded_chi2", []float64{r.FoldedChi2}}}
	if r.Bias != nil {
		vecs = append(vecs, named{"bias", r.Bias.Values}, named{"bias error", r.Bias.Error})
	}
	for _, x := range vecs {
		for i, v := range x.v {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("result: %s[%d] is %v", x.name, i, v)
			}
		}
	}
	if err := finiteRows("covariance", r.Covariance); err != nil {
		return err
	}
	for _, src := range r.Sources {
		for _, x := range []struct {
			what string
			v    []float64
		}{{"uncertainty", src.Uncertainty}, {"shift", src.Shift}, {"shift_up", src.ShiftUp}, {"shift_down", src.ShiftDown}} {
			for i, v := range x.v {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("result: the %s[%d] of source %q is %v", x.what, i, src.Name, v)
				}
			}
		}
		if err := finiteRows(fmt.Sprintf("the covariance of source %q", src.Name), src.Covariance); err != nil {
			return err
		}
	}
	for _, d := range r.Derived {
		for _, x := range [][]float64{d.Value, d.Uncertainty} {
			for i, v := range x {
				if math.IsNaN(v) || math.IsInf(v, 0) {
					return fmt.Errorf("result: bin %d of the derived quantity %q is %v", i, d.Name, v)
				}
			}
		}
		if err := finiteRows(fmt.Sprintf("the covariance of the derived quantity %q", d.Name), d.Covariance); err != nil {
			return err
		}
	}
	for _, s := range r.History {
		for _, v := range []float64{s.Chi2, s.Change, s.LogLikelihood} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("result: history of iteration %d holds %v", s.Iteration, v)
			}
		}
	}
	return nil
}

// Densities returns the estimate est and its uncertainty unc (nil for
// none) divided by the volume of each bin of the truth scheme s and by
// the integrated luminosity lumi (0 for none, taken as 1); 0 for flow
// bins and bins without a finite positive volume.
func Densities(s *binning.Scheme, est, unc []float64, lumi float64) (dens, densUnc []float64) {
	if lumi == 0 {
		lumi = 1
	}
	dens = make([]float64, len(est))
	if unc != nil {
		densUnc = make([]float64, len(est))
	}
	for g := range est {
		b := s.Bin(g)
		if b.Flow || !(b.Volume > 0) || math.IsInf(b.Volume, 0) {
			continue
		}
		dens[g] = est[g] / b.Volume / lumi
		if unc != nil {
			densUnc[g] = unc[g] / b.Volume / lumi
		}
	}
	return dens, densUnc
}

// densities returns the densities of r on the truth scheme s: those of
// the document when it holds them, else Densities of its estimate.
func (r *Result) densities(s *binning.Scheme) (dens, densUnc []float64) {
	if r.Density != nil {
		return r.Density, r.DensityUncertainty
	}
	return Densities(s, r.Estimate, r.Uncertainty, r.Luminosity)
}

// checkBins returns an error when the truth scheme s does not have one
// bin per truth bin of r.
func (r *Result) checkBins(s *binning.Scheme) error {
	if s.Len() != len(r.Estimate) {
		return fmt.Errorf("result: truth binning has %d bins, the result %d", s.Len(), len(r.Estimate))
	}
	return nil
}
