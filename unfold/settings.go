package unfold

import "math"

// Defaults used when the corresponding Settings field is zero.
const (
	// DefaultIterations is the number of iterations when neither
	// Settings.Iterations nor Settings.StopChi2 is set. A few iterations
	// are common practice for the iterative Bayesian method.
	DefaultIterations = 4
	// DefaultMaxIterations bounds the iteration when Settings.StopChi2 is
	// set and Settings.MaxIterations is zero.
	DefaultMaxIterations = 100
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

func (m BackgroundMode) String() string {
	switch m {
	case InModel:
		return "in-model"
	case Subtract:
		return "subtract"
	}
	return "BackgroundMode(?)"
}

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

func (m CovarianceMode) String() string {
	switch m {
	case NoCovariance:
		return "none"
	case Diagonal:
		return "diag"
	case Full:
		return "full"
	}
	return "CovarianceMode(?)"
}

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
	// through the linearised iteration (Jacobian-vector products).
	DiagonalProbes
	// DiagonalToys unfolds Settings.Toys Poisson pseudo-data sets and
	// takes the sample variance of the estimates.
	DiagonalToys
)

func (m DiagonalMethod) String() string {
	switch m {
	case DiagonalAuto:
		return "auto"
	case DiagonalExact:
		return "exact"
	case DiagonalProbes:
		return "probes"
	case DiagonalToys:
		return "toys"
	}
	return "DiagonalMethod(?)"
}

// Settings controls an unfolding. The zero value (and a nil *Settings)
// means: DefaultIterations iterations, background in the model, no
// smoothing, no uncertainty.
type Settings struct {
	// Iterations is a fixed number of iterations. Zero means
	// DefaultIterations unless StopChi2 is set; setting both is an error.
	Iterations int
	// StopChi2, when positive, stops the iteration at the first k ≥ 1
	// whose χ² between successive iterations (see the package
	// documentation) is at most StopChi2, or at MaxIterations.
	StopChi2 float64
	// MaxIterations bounds the iteration with StopChi2 (zero means
	// DefaultMaxIterations).
	MaxIterations int

	// Background selects how Problem.Background enters.
	Background BackgroundMode

	// Smoothing, when not nil, smooths the estimate after every
	// iteration before it becomes the next prior.
	Smoothing *Smoothing

	// Covariance selects the uncertainty computation.
	Covariance CovarianceMode
	// DiagonalMethod selects the method of Diagonal.
	DiagonalMethod DiagonalMethod
	// Probes is the number of random probes (zero means DefaultProbes).
	Probes int
	// Toys is the number of pseudo-data sets (zero means DefaultToys).
	Toys int
	// Seed seeds the probes and toys. Equal seeds give equal bits.
	Seed uint64
	// MemoryLimit bounds, in bytes, the dense Jacobian and covariance and
	// the probe vectors held at once (zero means DefaultMemoryLimit).
	MemoryLimit int64
}

// resolved is Settings with the defaults filled in and checked.
type resolved struct {
	Settings
	fixed   bool // a fixed number of iterations (Iterations), else stop rule
	maxIter int
}

func resolve(s *Settings) (*resolved, error) {
	var r resolved
	if s != nil {
		r.Settings = *s
	}
	switch {
	case r.Iterations < 0:
		return nil, &SettingsError{"Iterations", "must not be negative"}
	case r.MaxIterations < 0:
		return nil, &SettingsError{"MaxIterations", "must not be negative"}
	case r.StopChi2 < 0 || math.IsNaN(r.StopChi2) || math.IsInf(r.StopChi2, 0):
		return nil, &SettingsError{"StopChi2", "must be a finite number ≥ 0"}
	case r.Iterations > 0 && r.StopChi2 > 0:
		return nil, &SettingsError{"Iterations", "give either a fixed number of iterations or a stopping χ², not both"}
	case r.Probes < 0:
		return nil, &SettingsError{"Probes", "must not be negative"}
	case r.Probes == 1:
		return nil, &SettingsError{"Probes", "need at least 2 probes"}
	case r.Toys < 0:
		return nil, &SettingsError{"Toys", "must not be negative"}
	case r.Toys == 1:
		return nil, &SettingsError{"Toys", "need at least 2 toys"}
	case r.MemoryLimit < 0:
		return nil, &SettingsError{"MemoryLimit", "must not be negative"}
	case r.Background != InModel && r.Background != Subtract:
		return nil, &SettingsError{"Background", "unknown mode"}
	case r.Covariance < NoCovariance || r.Covariance > Full:
		return nil, &SettingsError{"Covariance", "unknown mode"}
	case r.DiagonalMethod < DiagonalAuto || r.DiagonalMethod > DiagonalToys:
		return nil, &SettingsError{"DiagonalMethod", "unknown method"}
	}
	if r.Smoothing != nil {
		if err := r.Smoothing.check(); err != nil {
			return nil, err
		}
	}
	if r.StopChi2 > 0 {
		r.maxIter = r.MaxIterations
		if r.maxIter == 0 {
			r.maxIter = DefaultMaxIterations
		}
	} else {
		r.fixed = true
		if r.Iterations == 0 {
			r.Iterations = DefaultIterations
		}
		r.maxIter = r.Iterations
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
	return &r, nil
}
