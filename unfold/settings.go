package unfold

import (
	"fmt"
	"strings"
)

// Defaults used when the corresponding Settings field is zero.
const (
	// DefaultProbes is the number of random probes for the stochastic
	// per-bin variances (relative precision of a variance ≤ sqrt(2/100)
	// ≈ 14%, of an uncertainty ≈ 7%).
	DefaultProbes = 100
	// DefaultToys is the number of Poisson pseudo-data sets for the toy
	// variances.
	DefaultToys = 500
	// DefaultMemoryLimit bounds the memory of the dense Jacobian and
	// covariance (4 GiB).
	DefaultMemoryLimit int64 = 4 << 30
)

// BackgroundMode says how the expected background enters the model.
type BackgroundMode int

const (
	// InModel adds the background to the folded expectation,
	// ν = R μ + b, keeping every estimate non-negative (the default).
	InModel BackgroundMode = iota
	// Subtract removes the background from the data before unfolding,
	// n' = max(n − b, 0); bins clipped at zero are listed in
	// Result.Clipped.
	Subtract
)

// CovarianceMode selects the data-statistical uncertainty to compute.
type CovarianceMode int

const (
	// NoCovariance computes no uncertainty (the default).
	NoCovariance CovarianceMode = iota
	// Diagonal computes per-bin variances only, by the method chosen in
	// Settings.DiagonalMethod.
	Diagonal
	// Full computes the full linearised covariance matrix. It is refused
	// with a *TooLargeError when the dense Jacobian and covariance do not
	// fit under Settings.MemoryLimit.
	Full
)

// DiagonalMethod selects how the per-bin variances of Diagonal are
// computed.
type DiagonalMethod int

const (
	// DiagonalAuto uses DiagonalExact when the dense Jacobian fits under
	// the memory limit and DiagonalProbes otherwise (the default).
	DiagonalAuto DiagonalMethod = iota
	// DiagonalExact takes the diagonal of the exact linearised covariance
	// from the dense Jacobian.
	DiagonalExact
	// DiagonalProbes propagates Settings.Probes random Rademacher probes
	// through the linearised method (Jacobian-vector products).
	DiagonalProbes
	// DiagonalToys unfolds Settings.Toys Poisson pseudo-data sets and
	// takes the sample variance of the estimates.
	DiagonalToys
	// DiagonalGamma unfolds Settings.Toys samples of the data
	// expectation drawn from the Gamma posterior of each count (with the
	// prior of Settings.SamplingPrior) and takes the sample variance of
	// the estimates (method.md §20).
	DiagonalGamma
)

// SamplingPrior selects the prior added to the counts when the response
// (Settings.ResponseSamples) or the data expectation (DiagonalGamma) is
// sampled from its posterior (method.md §20).
type SamplingPrior int

const (
	// NoSamplingPrior adds nothing: the Dirichlet parameters of a
	// response column are its effective counts, the Gamma shape of a
	// data count is its effective count. The mean of the samples is the
	// measured response (the measured data), and cells with no entries
	// stay empty (the default).
	NoSamplingPrior SamplingPrior = iota
	// FlatSamplingPrior adds 1 to every non-empty cell of a response
	// column and to its inefficiency cell, and 1 to the Gamma shape of
	// every data count (a flat prior, as in D'Agostini, arXiv:1010.0632).
	FlatSamplingPrior
)

// VarianceSource says which variance of the data the linearised
// propagation uses (method.md §24).
type VarianceSource int

const (
	// FromCounts uses the variance of the observed counts, var n_i = n_i
	// for Poisson data (the default).
	FromCounts VarianceSource = iota
	// FromExpectation uses the folded expectation of the estimate,
	// var n_i = ν_i = (R μ + b)_i, scaled by var n_i / n_i for weighted
	// data, so that a bin driven towards zero does not take its
	// variance with it. The toys (DiagonalToys) draw around the observed
	// counts and do not take it.
	FromExpectation
)

// The text names of the modes, indexed by value: the names of result.json,
// of the analysis file and of the command line. They are spelled here
// only.
var (
	backgroundNames = []string{InModel: "model", Subtract: "subtract"}
	covarianceNames = []string{NoCovariance: "none", Diagonal: "diag", Full: "full"}
	diagonalNames   = []string{DiagonalAuto: "auto", DiagonalExact: "exact", DiagonalProbes: "probes", DiagonalToys: "toys", DiagonalGamma: "gamma"}
	priorNames      = []string{NoSamplingPrior: "none", FlatSamplingPrior: "flat"}
	varianceNames   = []string{FromCounts: "counts", FromExpectation: "expectation"}
)

// VarianceSources returns the variance sources in order.
func VarianceSources() []VarianceSource { return []VarianceSource{FromCounts, FromExpectation} }

// String returns the text name ("counts" or "expectation").
func (v VarianceSource) String() string { return varianceEnum.Name(int(v)) }

// MarshalText returns the text name.
func (v VarianceSource) MarshalText() ([]byte, error) { return varianceEnum.Text(int(v)) }

// UnmarshalText parses a text name.
func (v *VarianceSource) UnmarshalText(text []byte) error {
	x, err := varianceEnum.Parse(text)
	if err == nil {
		*v = VarianceSource(x)
	}
	return err
}

// BackgroundModes returns the modes in order; their String values are
// the text names.
func BackgroundModes() []BackgroundMode { return []BackgroundMode{InModel, Subtract} }

// CovarianceModes returns the modes in order; their String values are
// the text names.
func CovarianceModes() []CovarianceMode { return []CovarianceMode{NoCovariance, Diagonal, Full} }

// DiagonalMethods returns the methods in order; their String values are
// the text names.
func DiagonalMethods() []DiagonalMethod {
	return []DiagonalMethod{DiagonalAuto, DiagonalExact, DiagonalProbes, DiagonalToys, DiagonalGamma}
}

// SamplingPriors returns the priors in order; their String values are
// the text names.
func SamplingPriors() []SamplingPrior { return []SamplingPrior{NoSamplingPrior, FlatSamplingPrior} }

// Enum holds the text names of an enumeration of settings, in the
// order of its values: the one implementation of String, MarshalText
// and UnmarshalText for the common settings' enumerations and for every
// method's own.
type Enum struct {
	Pkg   string   // the package that owns the type, prefixed to errors ("unfold")
	Type  string   // the Go type, for a value out of range ("CovarianceMode")
	What  string   // what a value is, for a name not known ("covariance mode")
	Names []string // Names[v] is the text name of value v
}

// Name returns the text name of v, or Type(v) when v is out of range.
func (e Enum) Name(v int) string {
	if v >= 0 && v < len(e.Names) {
		return e.Names[v]
	}
	return fmt.Sprintf("%s(%d)", e.Type, v)
}

// Text returns the text name of v; a value out of range is an error.
func (e Enum) Text(v int) ([]byte, error) {
	if v >= 0 && v < len(e.Names) {
		return []byte(e.Names[v]), nil
	}
	return nil, fmt.Errorf("%s: invalid %s(%d)", e.Pkg, e.Type, v)
}

// Parse returns the value named text; an unknown name is an error
// listing the names.
func (e Enum) Parse(text []byte) (int, error) {
	for i, n := range e.Names {
		if string(text) == n {
			return i, nil
		}
	}
	return 0, fmt.Errorf("%s: unknown %s %q (want %s)", e.Pkg, e.What, text, strings.Join(e.Names, ", "))
}

var (
	backgroundEnum = Enum{"unfold", "BackgroundMode", "background mode", backgroundNames}
	covarianceEnum = Enum{"unfold", "CovarianceMode", "covariance mode", covarianceNames}
	diagonalEnum   = Enum{"unfold", "DiagonalMethod", "diagonal method", diagonalNames}
	priorEnum      = Enum{"unfold", "SamplingPrior", "sampling prior", priorNames}
	varianceEnum   = Enum{"unfold", "VarianceSource", "variance source", varianceNames}
)

// String returns the text name ("none" or "flat").
func (p SamplingPrior) String() string { return priorEnum.Name(int(p)) }

// MarshalText returns the text name.
func (p SamplingPrior) MarshalText() ([]byte, error) {
	return priorEnum.Text(int(p))
}

// UnmarshalText sets p from its text name.
func (p *SamplingPrior) UnmarshalText(text []byte) error {
	v, err := priorEnum.Parse(text)
	*p = SamplingPrior(v)
	return err
}

// String returns the text name ("model" or "subtract").
func (m BackgroundMode) String() string { return backgroundEnum.Name(int(m)) }

// MarshalText returns the text name.
func (m BackgroundMode) MarshalText() ([]byte, error) {
	return backgroundEnum.Text(int(m))
}

// UnmarshalText sets m from its text name.
func (m *BackgroundMode) UnmarshalText(text []byte) error {
	v, err := backgroundEnum.Parse(text)
	*m = BackgroundMode(v)
	return err
}

// String returns the text name ("none", "diag" or "full").
func (m CovarianceMode) String() string { return covarianceEnum.Name(int(m)) }

// MarshalText returns the text name.
func (m CovarianceMode) MarshalText() ([]byte, error) {
	return covarianceEnum.Text(int(m))
}

// UnmarshalText sets m from its text name.
func (m *CovarianceMode) UnmarshalText(text []byte) error {
	v, err := covarianceEnum.Parse(text)
	*m = CovarianceMode(v)
	return err
}

// String returns the text name ("auto", "exact", "probes", "toys" or
// "gamma").
func (m DiagonalMethod) String() string { return diagonalEnum.Name(int(m)) }

// MarshalText returns the text name.
func (m DiagonalMethod) MarshalText() ([]byte, error) {
	return diagonalEnum.Text(int(m))
}

// UnmarshalText sets m from its text name.
func (m *DiagonalMethod) UnmarshalText(text []byte) error {
	v, err := diagonalEnum.Parse(text)
	*m = DiagonalMethod(v)
	return err
}

// Settings holds the settings every method shares: the background mode
// and the uncertainty computation. The zero value (and a nil *Settings)
// means background in the model and no uncertainty. Each method has its
// own settings type besides (see Method).
type Settings struct {
	// Background selects how Problem.Background enters.
	Background BackgroundMode

	// Covariance selects the uncertainty computation.
	Covariance CovarianceMode
	// DiagonalMethod selects the method of Diagonal.
	DiagonalMethod DiagonalMethod
	// Probes is the number of random probes (zero means DefaultProbes).
	Probes int
	// Toys is the number of pseudo-data sets, Poisson toys or Gamma
	// samples (zero means DefaultToys).
	Toys int
	// ResponseSamples is the number of responses sampled from the
	// Dirichlet posterior of each column for the simulation's statistical
	// uncertainty (source SourceSimulation, method.md §20); zero means
	// none. It needs Problem.GeneratedSumW2 and an uncertainty of the
	// data (Covariance other than NoCovariance); with Full the source has
	// the full covariance.
	ResponseSamples int
	// SamplingPrior is the prior of the Dirichlet and Gamma sampling.
	SamplingPrior SamplingPrior
	// Seed seeds the probes, toys and samples. Equal seeds give equal
	// bits (see Streams).
	Seed uint64
	// MemoryLimit bounds, in bytes, the dense Jacobian and covariance,
	// and (within half of it) the probes of a batch with their buffers
	// or the toys run at once (zero means DefaultMemoryLimit).
	MemoryLimit int64
	// VarianceFrom selects the data variance of the linearised
	// propagation (exact and probes).
	VarianceFrom VarianceSource
	// BiasToys is the number of toys of the bias estimate beside the
	// result (package validate, EstimateBias); 0, the default, is off.
	// Unfold itself does not use it.
	BiasToys int
	// Replicas is the number of Poisson bootstrap replicas of the
	// simulated events for the simulation's statistical uncertainty
	// (source SourceSimulation, method MethodReplicas, method.md §25);
	// zero means none. It needs the events, so Unfold itself does not use
	// it: the analysis run does (package analysis). It excludes
	// ResponseSamples (both estimate the same source) and needs an
	// uncertainty of the data, as ResponseSamples does.
	Replicas int

	// NegativeCells and Unexplained are the remedies Remedy applies
	// before the unfolding (zero: refuse).
	NegativeCells NegativeCells
	Unexplained   Unexplained
}

// Resolve checks s (nil means the zero value) and returns it with the
// defaults filled in. It is the one place the common settings are
// checked; the error is a *SettingsError whose Field is the Settings
// field.
func (s *Settings) Resolve() (Settings, error) {
	var r Settings
	if s != nil {
		r = *s
	}
	switch {
	case r.Probes < 0 || r.Probes == 1:
		return r, &SettingsError{"Probes", "must be at least 2"}
	case r.Toys < 0 || r.Toys == 1:
		return r, &SettingsError{"Toys", "must be at least 2"}
	case r.VarianceFrom < 0 || int(r.VarianceFrom) >= len(varianceNames):
		return r, &SettingsError{"VarianceFrom", "unknown variance source"}
	case r.VarianceFrom == FromExpectation && r.Covariance == Diagonal && (r.DiagonalMethod == DiagonalToys || r.DiagonalMethod == DiagonalGamma):
		return r, &SettingsError{"VarianceFrom", "the toys and the Gamma samples draw around the observed counts; the variance from the expectation applies to the linearised propagation (exact, probes)"}
	case r.BiasToys < 0 || r.BiasToys == 1:
		return r, &SettingsError{"BiasToys", "must be 0 (no bias estimate) or at least 2"}
	case r.MemoryLimit < 0:
		return r, &SettingsError{"MemoryLimit", "must not be negative"}
	case r.Background < 0 || int(r.Background) >= len(backgroundNames):
		return r, &SettingsError{"Background", "unknown mode"}
	case r.Covariance < 0 || int(r.Covariance) >= len(covarianceNames):
		return r, &SettingsError{"Covariance", "unknown mode"}
	case r.DiagonalMethod < 0 || int(r.DiagonalMethod) >= len(diagonalNames):
		return r, &SettingsError{"DiagonalMethod", "unknown method"}
	case r.NegativeCells < 0 || int(r.NegativeCells) >= len(negativeEnum.Names):
		return r, &SettingsError{"NegativeCells", "unknown remedy"}
	case r.Unexplained < 0 || int(r.Unexplained) >= len(unexplainedEnum.Names):
		return r, &SettingsError{"Unexplained", "unknown remedy"}
	case r.ResponseSamples < 0 || r.ResponseSamples == 1:
		return r, &SettingsError{"ResponseSamples", "must be 0 (no sampling) or at least 2"}
	case r.ResponseSamples > 0 && r.Covariance == NoCovariance:
		return r, &SettingsError{"ResponseSamples", "needs an uncertainty of the data too (a covariance mode other than none): the total uncertainty would leave the data's statistics out"}
	case r.Replicas < 0 || r.Replicas == 1:
		return r, &SettingsError{"Replicas", "must be 0 (no bootstrap) or at least 2"}
	case r.Replicas > 0 && r.ResponseSamples > 0:
		return r, &SettingsError{"Replicas", "cannot be combined with response samples: both estimate the statistical uncertainty of the simulation (source simulation); keep one of the two"}
	case r.Replicas > 0 && r.Covariance == NoCovariance:
		return r, &SettingsError{"Replicas", "needs an uncertainty of the data too (a covariance mode other than none): the total uncertainty would leave the data's statistics out"}
	case r.SamplingPrior < 0 || int(r.SamplingPrior) >= len(priorNames):
		return r, &SettingsError{"SamplingPrior", "unknown prior"}
	}
	if r.Probes == 0 {
		r.Probes = DefaultProbes
	}
	if r.Toys == 0 {
		r.Toys = DefaultToys
	}
	if r.MemoryLimit == 0 {
		r.MemoryLimit = DefaultMemoryLimit
	}
	return r, nil
}
