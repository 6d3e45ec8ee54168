package unfold

import (
	"math"

	"gonum.org/v1/gonum/mat"
)

// Names of the sources of uncertainty that are not systematic
// variations (a variation's source carries the variation's name).
const (
	// SourceData is the statistical uncertainty of the data.
	SourceData = "data"
	// SourceSimulation is the statistical uncertainty of the simulation
	// that built the response.
	SourceSimulation = "simulation"
)

// Source is one contribution to the uncertainty of the estimate: its
// variance per truth bin and, when it was computed, its covariance.
// Contributions of different sources are independent and add (method.md
// §18).
type Source struct {
	// Name is SourceData, SourceSimulation or a systematic variation's
	// name.
	Name string
	// Method says how the contribution was obtained: for the data
	// "linearised", "linearised-probes" or "poisson-toys"; others name
	// their own (for example a sampling of the response, or the shift of
	// a variation).
	Method string
	// Variance per truth bin (0 where not determined).
	Variance []float64
	// Covariance over truth bins; nil when only variances were computed.
	Covariance *mat.SymDense
	// Precision is the relative statistical precision of each variance
	// (0 for an exact computation); Samples the number of probes, toys
	// or samples behind it (0 for an exact computation).
	Precision float64
	Samples   int
	// Shift is the signed shift per truth bin of a systematic variation
	// (ShiftSource, PairSource); nil for the statistical sources. Up and
	// Down are the one-sided shifts of an up/down pair (nil otherwise).
	Shift, Up, Down []float64
	// Derived holds the source's covariance of each derived quantity of
	// the problem (Problem.Derived), in order, computed from the source
	// itself (method.md §22): exactly from the Jacobian or the shift,
	// or from the same probes or samples as Variance (with its
	// Precision); nil when the problem has none or the source could not
	// give them. AddSource fills it for a shift.
	Derived []*mat.SymDense
}

// AddSource appends s to r.Sources and sets the totals: r.Uncertainty to
// the square root of the summed variances (0 where not determined), and
// r.Covariance to the sum of the sources' covariances when every source
// has one (nil otherwise: a total covariance that omits a source's
// correlations would mislead). r.Determined must be set. AddSource keeps
// s.Variance and s.Covariance (it does not copy them); it panics if their
// lengths differ from the estimate's.
func (r *Result) AddSource(s Source) {
	nt := len(r.Estimate)
	if len(s.Variance) != nt || (s.Covariance != nil && s.Covariance.SymmetricDim() != nt) {
		panic("unfold: a source of the wrong length")
	}
	if s.Derived == nil && s.Shift != nil {
		s.Derived = shiftDerived(r.DerivedJacobians, s.Shift)
	}
	r.Sources = append(r.Sources, s)
	if r.Uncertainty == nil || len(r.Sources) == 1 {
		r.Uncertainty = make([]float64, nt)
	}
	for j := range r.Uncertainty {
		v := 0.0
		for _, src := range r.Sources {
			v += src.Variance[j]
		}
		if r.Determined[j] && v > 0 {
			r.Uncertainty[j] = math.Sqrt(v)
		} else {
			r.Uncertainty[j] = 0
		}
	}
	r.Covariance = nil
	for _, src := range r.Sources {
		if src.Covariance == nil {
			r.Covariance = nil
			return
		}
		if r.Covariance == nil {
			if len(r.Sources) == 1 {
				r.Covariance = src.Covariance
				continue
			}
			r.Covariance = mat.NewSymDense(nt, nil)
		}
		r.Covariance.AddSym(r.Covariance, src.Covariance)
	}
}

// Source returns the source of r with the given name, or nil.
func (r *Result) Source(name string) *Source {
	for i := range r.Sources {
		if r.Sources[i].Name == name {
			return &r.Sources[i]
		}
	}
	return nil
}
