package unfold

import "context"

// Stepper is implemented by a Fit whose estimate is the last of a
// sequence of steps that it keeps (the iterations of the iterative
// method, when asked to keep them): StepEstimates returns the estimate
// of every step, step 0 being the start, or nil when none are kept
// (Result.StepEstimates). For such a fit the uncertainty drivers record
// the per-bin variance of every step without re-running the method
// (Result.StepVariance): its Jacobian and Tangents call Jacobian.Step and
// Probes.Step after the start and after every step, and its toy runners
// implement StepToyRunner.
type Stepper interface {
	StepEstimates() [][]float64
}

// StepToyRunner is a ToyRunner that reports the estimate of every step
// of a toy: RunSteps calls each with k = 0, 1, ... and the estimate of
// step k (the runner's own slice, valid during the call).
type StepToyRunner interface {
	ToyRunner
	RunSteps(ctx context.Context, n, b []float64, each func(k int, est []float64)) error
}

// Step tells the driver that Data holds the Jacobian of step k of a
// Stepper's computation (0 the start); a method calls it after the start
// and after each step while it computes the Jacobian. It does nothing
// unless the driver records the steps.
func (jc *Jacobian) Step(k int) {
	if jc.step != nil {
		jc.step(k)
	}
}

// Step tells the driver that the tangents hold those of step k of a
// Stepper's computation (0 the start); a method calls it after the start
// and after each step while it computes the tangents. It does nothing
// unless the driver records the steps.
func (pr *Probes) Step(k int) {
	if pr.step != nil {
		pr.step(k)
	}
}

// steps returns the estimates of the steps fit keeps (nil when it is no
// Stepper).
func steps(fit Fit) [][]float64 {
	if s, ok := fit.(Stepper); ok {
		return s.StepEstimates()
	}
	return nil
}

// ToyBlock is the number of toys a ToyBlockRunner unfolds together, in
// one pass over the response per iteration for all of them.
const ToyBlock = 8

// ToyBlocker is implemented by a Fit that can unfold its toys in blocks
// of up to ToyBlock. The toy ensembles use it instead of NewToyRunner
// when a block's memory fits within half the memory limit (see
// Settings.MemoryLimit); every toy gets exactly
// the bits its ToyRunner would give it alone, so the results do not
// depend on the blocks.
type ToyBlocker interface {
	// NewToyBlockRunner returns a runner of blocks of toys, or nil when
	// the fit runs its toys one by one (with NewToyRunner). The runner is
	// used by one goroutine.
	NewToyBlockRunner() ToyBlockRunner
}

// ToyBlockRunner re-runs a method on blocks of pseudo-data sets.
type ToyBlockRunner interface {
	// RunBlock returns the estimates for the data n[s] of the
	// len(n) ≤ ToyBlock toys of a block and, when the background
	// variance is propagated, their backgrounds b[s] (b nil otherwise),
	// the same bits as ToyRunner.Run on each alone. With each not nil and
	// a fit keeping its steps (Stepper), it also reports the estimate of
	// every step of every toy as StepToyRunner.RunSteps does: each(s, k,
	// est) for k = 0, 1, ... and, within each k, s = 0, 1, ..., from the
	// calling goroutine. The slices are the runner's own, valid until the
	// next call (est during the call only).
	RunBlock(ctx context.Context, n, b [][]float64, each func(s, k int, est []float64)) ([][]float64, error)
}
