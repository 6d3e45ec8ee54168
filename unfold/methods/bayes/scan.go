package bayes

import "context"

// recorder is the tangents of the iteration scan: it hands each the
// estimate μ(k) of the start (k = 0) and of every iteration, while the
// iteration passes through it. The slice is the iterator's own, valid
// during the call.
type recorder struct {
	k    int
	each func(k int, mu []float64)
}

func (r *recorder) init(_ context.Context, it *iterator) error {
	r.k = 0
	r.each(0, it.mu)
	return nil
}

func (r *recorder) step(_ context.Context, it *iterator) error {
	r.k++
	r.each(r.k, it.next) // μ(k), smoothed, before the iterator swaps it in
	return nil
}

// stepToyRunner is the toy runner of a fit keeping its iterations: it
// reports the estimate of every iteration of a toy
// (unfold.StepToyRunner).
type stepToyRunner struct{ *toyRunner }

func (r *stepToyRunner) RunSteps(ctx context.Context, n, b []float64, each func(k int, est []float64)) error {
	if b != nil {
		r.mod.b = b
	}
	r.rec.each = each
	return r.it.iterate(ctx, n, r.rs, r.rec, &r.d)
}
