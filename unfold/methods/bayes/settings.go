package bayes

import (
	"math"

	"github.com/desmear/desmear/unfold"
)

// Defaults used when the corresponding Settings field is zero.
const (
	// DefaultIterations is the number of iterations when neither
	// Settings.Iterations nor Settings.StopChi2 is set. A few iterations
	// are common practice for the iterative Bayesian method.
	DefaultIterations = 4
	// DefaultMaxIterations bounds the iteration when Settings.StopChi2 is
	// set and Settings.MaxIterations is zero.
	DefaultMaxIterations = 100
)

// Settings are the settings of the iterative method; *Settings is the
// method (unfold.Method). The zero value (and a nil *Settings) means
// DefaultIterations iterations without smoothing.
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

	// Smoothing, when not nil, smooths the estimate after every
	// iteration before it becomes the next prior.
	Smoothing *Smoothing

	// Scan keeps the estimate of every iteration
	// (unfold.Result.StepEstimates) and
	// makes the uncertainty computation record the per-bin variance of
	// every iteration (unfold.Result.StepVariance), in the same run: the
	// iteration scan. It costs two truth-sized vectors per iteration.
	Scan bool
}

// resolved is Settings with the defaults filled in and checked.
type resolved struct {
	Settings
	fixed   bool // a fixed number of iterations (Iterations), else stop rule
	maxIter int
}

// fixedIterations is the stopping rule of a re-run: k iterations.
func fixedIterations(k int) *resolved { return &resolved{fixed: true, maxIter: k} }

// Resolve checks s (nil means the zero value) and returns it with the
// defaults filled in: Iterations with a fixed count, MaxIterations with a
// stopping χ², the smoothing strength. It is the one place the method's
// settings are checked; the error is an *unfold.SettingsError whose Field
// is the Settings field.
func (s *Settings) Resolve() (Settings, error) {
	r, err := s.resolve()
	if err != nil {
		return Settings{}, err
	}
	out := r.Settings
	if r.fixed {
		out.MaxIterations = 0
	} else {
		out.MaxIterations = r.maxIter
	}
	if out.Smoothing != nil && out.Smoothing.Strength == 0 {
		sm := *out.Smoothing
		sm.Strength = 1
		out.Smoothing = &sm
	}
	return out, nil
}

func (s *Settings) resolve() (*resolved, error) {
	var r resolved
	if s != nil {
		r.Settings = *s
	}
	switch {
	case r.Iterations < 0:
		return nil, &unfold.SettingsError{Field: "Iterations", Reason: "must be ≥ 1"}
	case r.MaxIterations < 0:
		return nil, &unfold.SettingsError{Field: "MaxIterations", Reason: "must be ≥ 1"}
	case r.StopChi2 < 0 || math.IsNaN(r.StopChi2) || math.IsInf(r.StopChi2, 0):
		return nil, &unfold.SettingsError{Field: "StopChi2", Reason: "must be a finite number > 0"}
	case r.Iterations > 0 && r.StopChi2 > 0:
		return nil, &unfold.SettingsError{Field: "Iterations", Reason: "give either a fixed number of iterations or a stopping χ², not both"}
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
	return &r, nil
}
