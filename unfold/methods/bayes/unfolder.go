package bayes

import (
	"context"
	"slices"

	"github.com/desmear/desmear/unfold"
)

// Unfolder runs the iteration again and again on one prepared problem:
// its work buffers are allocated once, by NewUnfolder, and reused by
// every call of Unfold, while the problem's data, prior or response
// values change in between (unfold.Prepared's SetData, SetPrior,
// SetResponse). This is the form for ensembles of unfoldings of one
// response (toys, replicas, resampled responses, scans). Each call gives
// the same bits as unfold.Unfold on the same inputs without an
// uncertainty computation.
//
// An Unfolder is used by one goroutine at a time; several Unfolders of
// one Prepared may run concurrently only while nobody changes it.
type Unfolder struct {
	p   *unfold.Prepared
	rs  *resolved
	st  *Smoothing
	sm  *smoother
	det []bool // the determined bins sm was built for
	mod model
	it  *iterator
	d   Details
}

// NewUnfolder allocates the work of the iteration with settings s (nil
// means the defaults) on p.
//
// Errors: *unfold.SettingsError for invalid settings, and the errors of
// the smoothing's set-up.
func NewUnfolder(p *unfold.Prepared, s *Settings) (*Unfolder, error) {
	if s == nil {
		s = &Settings{}
	}
	rs, err := s.resolve()
	if err != nil {
		return nil, err
	}
	u := &Unfolder{p: p, rs: rs, st: rs.Smoothing}
	u.mod.load(p)
	if err := u.smoother(); err != nil {
		return nil, err
	}
	u.it = newIterator(&u.mod, u.sm)
	u.d.History = make([]Step, 0, rs.maxIter+1)
	return u, nil
}

// smoother (re)builds the smoothing when the determined bins changed.
func (u *Unfolder) smoother() error {
	if u.st == nil || u.sm != nil && slices.Equal(u.det, u.mod.det) {
		return nil
	}
	sm, err := newSmoother(u.st, u.mod.det)
	if err != nil {
		return err
	}
	u.sm, u.det = sm, append(u.det[:0], u.mod.det...)
	if u.it != nil {
		u.it.sm = sm
	}
	return nil
}

// RecordLogLikelihood sets whether the following calls of Unfold compute
// the log-likelihood of every step into the details' History: on by
// default, as unfold.Unfold does. Off, every Step.LogLikelihood is 0 and
// each iteration skips one logarithm per reco bin (about a third of the
// iteration's cost beyond its sweep over the matrix): the form for
// ensembles that keep only the estimates. The estimate, the folded
// spectrum, χ² and the change keep their bits either way.
func (u *Unfolder) RecordLogLikelihood(on bool) { u.it.noLL = !on }

// Unfold iterates on the problem's current data, prior and response and
// writes the estimate μ into dst (one entry per truth bin) and, unless
// folded is nil, the folded spectrum into folded (one per reco bin, as
// unfold.Result.Folded: with the background in both modes). It returns
// the iteration's details, which are the Unfolder's own and valid until
// the next call. dst and folded must not alias each other or the
// problem's slices.
//
// Unfold allocates no vector: only a small constant number of words per
// iteration for starting the parallel passes (see BENCHMARKS.md); a
// change of the determined bins under smoothing rebuilds the smoothing.
// It panics if dst or folded have the wrong length.
//
// Errors: *unfold.NumericalError on overflow, ctx.Err() when ctx is
// cancelled.
func (u *Unfolder) Unfold(ctx context.Context, dst, folded []float64) (*Details, error) {
	if len(dst) != u.p.TruthBins() || folded != nil && len(folded) != u.p.RecoBins() {
		panic("bayes: Unfolder.Unfold destination length mismatch")
	}
	u.mod.load(u.p)
	if err := u.smoother(); err != nil {
		return nil, err
	}
	u.it.rp = u.p.PriorFold()
	if err := u.it.iterate(ctx, u.mod.n, u.rs, nil, &u.d); err != nil {
		return nil, err
	}
	copy(dst, u.it.mu)
	if folded != nil {
		copy(folded, u.it.nu)
		for i, b := range u.p.SubtractedBackground() {
			folded[i] += b
		}
	}
	return &u.d, nil
}
