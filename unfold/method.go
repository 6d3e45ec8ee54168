package unfold

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// Result is the outcome of Unfold. Slices over truth bins have one entry
// per truth bin, over reco bins one per reco bin.
type Result struct {
	// Method is the name of the method (Method.Name).
	Method string
	// Estimate is μ, the unfolded expected count per truth bin; 0 where
	// not determined.
	Estimate []float64
	// Determined reports the truth bins the response can measure
	// (efficiency > 0). The others are excluded from the fit.
	Determined []bool
	// Efficiency is eps_j = Σ_i A_ij / G_j.
	Efficiency []float64
	// Folded is ν = R μ + b, the expected reco spectrum of the estimate
	// (with the background, in both background modes).
	Folded []float64
	// Clipped lists the reco bins where the data minus the background was
	// negative and was set to zero (Subtract mode only).
	Clipped []int

	// Uncertainty is the square root of the total variance of each
	// estimate, summed over Sources (nil without an uncertainty
	// computation; 0 where not determined).
	Uncertainty []float64
	// Covariance is the total covariance, the sum of the sources'
	// covariances (Full only, and only when every source has one).
	Covariance *mat.SymDense
	// Sources is the breakdown of the uncertainty by source, the data's
	// statistics (SourceData) first; AddSource keeps the totals above.
	Sources []Source
	// UncertaintyMethod names the method that produced the data source:
	// "linearised" (exact first order), "linearised-probes",
	// "poisson-toys" or "gamma-samples"; empty without an uncertainty
	// computation.
	UncertaintyMethod string
	// UncertaintyPrecision is the relative statistical precision of each
	// variance in Uncertainty (sqrt(2/S) for S probes, at most; sqrt(2/(T−1))
	// for T toys); 0 for the exact propagation.
	UncertaintyPrecision float64
	// Samples is the number of probes or toys used (0 for exact).
	Samples int
	// Seed is Settings.Seed, and Streams the random streams the
	// uncertainty computation drew from (none for an exact one).
	Seed    uint64
	Streams []Stream
	// StepEstimates is, for a method that keeps the steps of its
	// computation (Stepper: the iterations of the iterative method, when
	// asked), the estimate of every step, StepEstimates[k] for step k (0
	// the start; the last is Estimate); nil otherwise. StepVariance is
	// then the per-bin variance of each, computed by the same propagation
	// as Uncertainty while it passes through the steps (nil without an
	// uncertainty computation).
	StepEstimates [][]float64
	StepVariance  [][]float64

	// DerivedJacobians holds D = ∂y/∂μ at Estimate for each derived
	// quantity of the problem (Problem.Derived), nil without them or
	// without an uncertainty computation; the sources' Derived
	// covariances propagate through them.
	DerivedJacobians []*RowMatrix

	// Details holds what is particular to the method (Fit.Details), for
	// example the iteration history of the iterative method.
	Details any
}

// Method is an unfolding method with its own settings: the value is the
// method's settings type (a pointer), so choosing a method means giving
// its settings.
type Method interface {
	// Name is the method's name, as recorded in Result.Method.
	Name() string
	// Validate checks the method's settings; it returns a
	// *SettingsError naming the field.
	Validate() error
	// Fit runs the method on p (settings already validated).
	Fit(ctx context.Context, p *Prepared) (Fit, error)
}

// Refitter is implemented by a method that can unfold one prepared
// problem again and again while its Set methods change it, reusing its
// work (ensembles of sampled responses). NewRefit returns a function
// writing the estimate for p's current state into dst (one entry per
// truth bin), the same bits as Fit(ctx, p).Estimate(); it is used by one
// goroutine. Methods without it are re-run with Fit.
type Refitter interface {
	NewRefit(p *Prepared) (func(ctx context.Context, dst []float64) error, error)
}

// Fit is the nominal result of a method on a prepared problem, able to
// propagate perturbations of the data through the same computation. The
// uncertainty drivers of Unfold use it; the method supplies only what
// depends on its algorithm.
//
// The estimate μ(n, b) is treated as a function of the data n and of the
// background b inside the model (Prepared.Data, Prepared.Background).
// Linear methods give it exactly, linearised methods to first order at
// the nominal data.
type Fit interface {
	// Estimate returns μ per truth bin (0 where not determined).
	Estimate() []float64
	// Folded returns R μ + b with b the background inside the model.
	Folded() []float64
	// Details returns the method-specific details stored in
	// Result.Details.
	Details() any

	// Jacobian computes the dense Jacobian dμ/d(n, b) at the nominal
	// data into dst (dst.Rows = truth bins, dst.Cols =
	// Prepared.Columns()).
	Jacobian(ctx context.Context, dst *Jacobian) error
	// Tangents computes the Jacobian-vector products dμ_s = J z_s for
	// the probes of dst into dst.Tangent(s).
	Tangents(ctx context.Context, dst *Probes) error
	// NewToyRunner returns a runner that re-runs the method with the
	// same regularisation on pseudo-data. Every runner is used by one
	// goroutine; several runners run concurrently.
	NewToyRunner() ToyRunner
}

// ToyRunner re-runs a method on pseudo-data.
type ToyRunner interface {
	// Run returns the estimate for data n and, when the background
	// variance is propagated, background b (nil otherwise). The
	// returned slice is the runner's own, valid until the next call.
	Run(ctx context.Context, n, b []float64) ([]float64, error)
}

// Unfold unfolds p with the common settings s (nil means the defaults)
// and method m (m carries the method's settings).
//
// Errors: *InputError for invalid or inconsistent inputs, *SettingsError
// for invalid settings, *TooLargeError when an uncertainty computation
// does not fit under the memory limit, *NumericalError on overflow, and
// ctx.Err() when the context is cancelled.
func Unfold(ctx context.Context, p *Problem, s *Settings, m Method) (*Result, error) {
	if err := m.Validate(); err != nil {
		return nil, err
	}
	rs, err := s.Resolve()
	if err != nil {
		return nil, err
	}
	pr, err := Prepare(p, rs.Background)
	if err != nil {
		return nil, err
	}
	if err := pr.checkNet(); err != nil {
		return nil, err
	}
	plan, err := planUncertainty(pr, &rs)
	if err != nil {
		return nil, err
	}
	if rs.Covariance != NoCovariance {
		if err := CheckDerived(p.Derived, pr.nt, pr.nr, rs.MemoryLimit); err != nil {
			return nil, err
		}
	}
	fit, err := m.Fit(ctx, pr)
	if err != nil {
		return nil, err
	}
	res := &Result{
		Method:     m.Name(),
		Estimate:   append([]float64(nil), fit.Estimate()...),
		Determined: append([]bool(nil), pr.det...),
		Efficiency: append([]float64(nil), pr.eps...),
		Folded:     append([]float64(nil), fit.Folded()...),
		Clipped:    pr.clip,
		Details:    fit.Details(),
	}
	if st := steps(fit); st != nil {
		res.StepEstimates = st
	}
	for i, b := range pr.SubtractedBackground() {
		res.Folded[i] += b
	}
	res.Seed = rs.Seed
	if rs.Covariance != NoCovariance {
		res.DerivedJacobians = derivedJacobians(p.Derived, res.Estimate)
	}
	if err := plan.finish(ctx, fit, res); err != nil {
		return nil, err
	}
	if rs.ResponseSamples > 0 {
		src, err := responseSource(ctx, p, &rs, m, res.Determined, res.DerivedJacobians)
		if err != nil {
			return nil, err
		}
		res.AddSource(*src)
		res.Streams = append(res.Streams, Stream{Unit: "response-sample", Offset: responseStream})
	}
	if err := res.checkFinite(); err != nil {
		return nil, err
	}
	return res, nil
}

// checkFinite returns a *NumericalError naming the first quantity and
// bin of r that is NaN or infinite, or nil.
func (r *Result) checkFinite() error {
	for _, q := range []struct {
		name, bins string
		x          []float64
	}{
		{"estimate", "truth", r.Estimate}, {"efficiency", "truth", r.Efficiency},
		{"folded spectrum", "reco", r.Folded}, {"uncertainty", "truth", r.Uncertainty},
	} {
		for i, v := range q.x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return &NumericalError{Iteration: -1, Reason: fmt.Sprintf("the %s of %s bin %d is %v (overflow or a degenerate input)", q.name, q.bins, i, v)}
			}
		}
	}
	if c := r.Covariance; c != nil {
		n := c.SymmetricDim()
		for i := range n {
			for j := i; j < n; j++ {
				if v := c.At(i, j); math.IsNaN(v) || math.IsInf(v, 0) {
					return &NumericalError{Iteration: -1, Reason: fmt.Sprintf("the covariance of truth bins %d and %d is %v (overflow or a degenerate input)", i, j, v)}
				}
			}
		}
	}
	return nil
}
