package tikhonov

import (
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// Defaults used when the corresponding Settings field is zero.
const (
	// DefaultTolerance is the stopping tolerance of the conjugate
	// gradients: the residual of the normal equations relative to their
	// right-hand side, |r_k| ≤ tol |rhs|.
	DefaultTolerance = 1e-10
	// DefaultScanTolerance is the stopping tolerance of the conjugate
	// gradients at the points of a scan of tau, which need the residual
	// and penalty norms only (to about 1e-6 relative).
	DefaultScanTolerance = 1e-6
	// DefaultScanPoints is the number of values of tau in a scan.
	DefaultScanPoints = 31
	// DenseLimit is the largest number of truth bins solved with a dense
	// Cholesky factorisation (gonum); larger problems use the sparse
	// conjugate gradients.
	DenseLimit = 1500
	// CorrelationLimit is the largest number of determined truth bins for
	// which the global correlation is computed exactly, from the dense
	// covariance and its inverse; above it the average is estimated from
	// CorrelationSample bins.
	CorrelationLimit = 1500
)

// Criterion chooses tau when no fixed tau is given.
type Criterion int

const (
	// LCurve takes the tau of maximum curvature of the L-curve (the
	// default).
	LCurve Criterion = iota
	// Correlation takes the tau of minimum average global correlation.
	Correlation
)

// Penalty is the derivative the regularisation penalises.
type Penalty int

const (
	// Curvature penalises second differences (the default).
	Curvature Penalty = iota
	// Slope penalises first differences.
	Slope
)

// Solver is how the normal equations are solved.
type Solver int

const (
	// AutoSolver uses DenseSolver up to DenseLimit truth bins and
	// SparseSolver above (the default).
	AutoSolver Solver = iota
	// DenseSolver factorises the normal matrix (gonum Cholesky).
	DenseSolver
	// SparseSolver runs preconditioned conjugate gradients on the sparse
	// operators.
	SparseSolver
)

// Bias is the vector x0 the penalty pulls towards.
type Bias int

const (
	// NoBias is x0 = 0 (the default).
	NoBias Bias = iota
	// PriorBias is x0 = s p, the prior (the generated spectrum unless
	// another is given) scaled so that Σ_j eps_j x0_j = Σ_i (n_i − b_i)
	// for the nominal data: the iterative method's starting point. The
	// scale is held fixed in the uncertainty propagation.
	PriorBias
)

// The text names, indexed by value: the names of result.json, of the
// analysis file and of the command line, spelled here only.
var (
	criterionNames = []string{LCurve: "lcurve", Correlation: "correlation"}
	penaltyNames   = []string{Curvature: "curvature", Slope: "slope"}
	biasNames      = []string{NoBias: "zero", PriorBias: "prior"}
	solverNames    = []string{AutoSolver: "auto", DenseSolver: "dense", SparseSolver: "cg"}
)

// Criteria returns the criteria in order.
func Criteria() []Criterion { return []Criterion{LCurve, Correlation} }

// Penalties returns the penalties in order.
func Penalties() []Penalty { return []Penalty{Curvature, Slope} }

// Biases returns the bias choices in order.
func Biases() []Bias { return []Bias{NoBias, PriorBias} }

var (
	criterionEnum = unfold.Enum{Pkg: "tikhonov", Type: "Criterion", What: "tau criterion", Names: criterionNames}
	penaltyEnum   = unfold.Enum{Pkg: "tikhonov", Type: "Penalty", What: "penalty", Names: penaltyNames}
	biasEnum      = unfold.Enum{Pkg: "tikhonov", Type: "Bias", What: "bias", Names: biasNames}
	solverEnum    = unfold.Enum{Pkg: "tikhonov", Type: "Solver", What: "solver", Names: solverNames}
)

// String returns the text name ("lcurve" or "correlation").
func (c Criterion) String() string { return criterionEnum.Name(int(c)) }

// MarshalText returns the text name.
func (c Criterion) MarshalText() ([]byte, error) { return criterionEnum.Text(int(c)) }

// UnmarshalText sets c from its text name.
func (c *Criterion) UnmarshalText(b []byte) error {
	v, err := criterionEnum.Parse(b)
	*c = Criterion(v)
	return err
}

// String returns the text name ("curvature" or "slope").
func (p Penalty) String() string { return penaltyEnum.Name(int(p)) }

// MarshalText returns the text name.
func (p Penalty) MarshalText() ([]byte, error) { return penaltyEnum.Text(int(p)) }

// UnmarshalText sets p from its text name.
func (p *Penalty) UnmarshalText(b []byte) error {
	v, err := penaltyEnum.Parse(b)
	*p = Penalty(v)
	return err
}

// String returns the text name ("zero" or "prior").
func (b Bias) String() string { return biasEnum.Name(int(b)) }

// MarshalText returns the text name.
func (b Bias) MarshalText() ([]byte, error) { return biasEnum.Text(int(b)) }

// UnmarshalText sets b from its text name.
func (b *Bias) UnmarshalText(t []byte) error {
	v, err := biasEnum.Parse(t)
	*b = Bias(v)
	return err
}

// Settings are the settings of the Tikhonov method; *Settings is the
// method (unfold.Method). The zero value (and a nil *Settings) means a
// curvature penalty along the global bin index, x0 = 0 and tau chosen by
// the L-curve.
type Settings struct {
	// Tau is a fixed regularisation strength τ > 0. Zero means: chosen
	// by Criterion from a scan.
	Tau float64
	// Criterion chooses tau when Tau is zero; a fixed Tau with
	// Correlation is refused as contradictory.
	Criterion Criterion
	// ScanMin and ScanMax bound the scan of tau (log-spaced, ScanPoints
	// values); zero means the range of Scan's documentation.
	ScanMin, ScanMax float64
	// ScanPoints is the number of values of the scan (zero means
	// DefaultScanPoints; at least 5).
	ScanPoints int

	// Penalty is the derivative penalised.
	Penalty Penalty
	// Widths divides the differences by the bin widths: the penalty acts
	// on the densities x_j / V_j (V_j the bin volume) and differences are
	// divided by the distances of the bin centres.
	Widths bool
	// Truth is the truth binning along whose axes the penalty runs. Nil
	// means one axis along the global truth index (every pair or triple
	// of consecutive bins); Widths then needs Truth.
	Truth *binning.Scheme
	// Bias chooses x0.
	Bias Bias

	// Tolerance is the stopping tolerance of the conjugate gradients
	// (zero means DefaultTolerance).
	Tolerance float64
	// ScanTolerance is the tolerance of the conjugate gradients at the
	// points of the scan (zero means DefaultScanTolerance; never below
	// Tolerance).
	ScanTolerance float64
	// MaxIterations bounds the conjugate-gradient iterations of one solve
	// (zero means 10 times the number of truth bins, at least 1000).
	MaxIterations int
	// Solver chooses how the normal equations are solved.
	Solver Solver
}

// check validates s (nil means the zero value); the error is an
// *unfold.SettingsError naming the field.
func (s *Settings) check() (Settings, error) {
	var r Settings
	if s != nil {
		r = *s
	}
	bad := func(v float64) bool { return v < 0 || math.IsNaN(v) || math.IsInf(v, 0) }
	switch {
	case bad(r.Tau):
		return r, &unfold.SettingsError{Field: "Tau", Reason: "must be a finite number > 0"}
	case r.Tau > 0 && r.Criterion == Correlation:
		return r, &unfold.SettingsError{Field: "Tau", Reason: "give either a fixed tau or a criterion to choose it, not both"}
	case r.Criterion < 0 || int(r.Criterion) >= len(criterionNames):
		return r, &unfold.SettingsError{Field: "Criterion", Reason: "unknown criterion"}
	case r.Penalty < 0 || int(r.Penalty) >= len(penaltyNames):
		return r, &unfold.SettingsError{Field: "Penalty", Reason: "unknown penalty"}
	case r.Bias < 0 || int(r.Bias) >= len(biasNames):
		return r, &unfold.SettingsError{Field: "Bias", Reason: "unknown bias"}
	case bad(r.ScanMin) || bad(r.ScanMax) || r.ScanMax > 0 && r.ScanMin >= r.ScanMax:
		return r, &unfold.SettingsError{Field: "ScanMin", Reason: "the scan range must be 0 < min < max"}
	case r.ScanPoints < 0 || r.ScanPoints > 0 && r.ScanPoints < 5:
		return r, &unfold.SettingsError{Field: "ScanPoints", Reason: "must be at least 5"}
	case bad(r.Tolerance) || r.Tolerance >= 1:
		return r, &unfold.SettingsError{Field: "Tolerance", Reason: "must be in (0, 1)"}
	case r.Solver < 0 || int(r.Solver) >= len(solverNames):
		return r, &unfold.SettingsError{Field: "Solver", Reason: "unknown solver"}
	case bad(r.ScanTolerance) || r.ScanTolerance >= 1:
		return r, &unfold.SettingsError{Field: "ScanTolerance", Reason: "must be in (0, 1)"}
	case r.MaxIterations < 0:
		return r, &unfold.SettingsError{Field: "MaxIterations", Reason: "must be ≥ 1"}
	case r.Widths && r.Truth == nil:
		return r, &unfold.SettingsError{Field: "Widths", Reason: "dividing by bin widths needs the truth binning"}
	}
	if r.ScanPoints == 0 {
		r.ScanPoints = DefaultScanPoints
	}
	if r.Tolerance == 0 {
		r.Tolerance = DefaultTolerance
	}
	if r.ScanTolerance == 0 {
		r.ScanTolerance = DefaultScanTolerance
	}
	return r, nil
}

// String returns the text name ("auto", "dense" or "cg").
func (s Solver) String() string { return solverEnum.Name(int(s)) }
