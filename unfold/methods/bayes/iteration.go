package bayes

import (
	"context"
	"math"
	"runtime"
	"sync/atomic"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// Step records one iteration. Iteration 0 is the start, μ(0).
type Step struct {
	Iteration int
	// Chi2 is the χ² between μ(k) and μ(k−1) (0 for the start):
	// Σ_j eps_j (μ_j(k) − μ_j(k−1))² / μ_j(k) over determined bins with
	// μ_j(k) > 0.
	Chi2 float64
	// Change is the relative change Σ_j |μ_j(k) − μ_j(k−1)| / Σ_j μ_j(k)
	// (0 for the start).
	Change float64
	// LogLikelihood is the Poisson log-likelihood of the data at μ(k),
	// Σ_i (n_i ln ν_i − ν_i) over reco bins with ν_i > 0, without the
	// constant −Σ ln n_i!.
	LogLikelihood float64
}

// Details is what the iterative method adds to unfold.Result.Details.
type Details struct {
	// Iterations is the number of iterations made.
	Iterations int
	// Converged reports that the StopChi2 criterion was met; it is false
	// with a fixed number of iterations.
	Converged bool
	// StoppedBy says how the iteration stopped: StoppedByIterations,
	// StoppedByChi2 or StoppedByMaxIterations.
	StoppedBy string
	// History has one Step per iteration, History[0] being the start.
	History []Step
}

// How the iteration stopped (Details.StoppedBy; the names of result.json).
const (
	// StoppedByIterations: the fixed number of iterations was made.
	StoppedByIterations = "iterations"
	// StoppedByChi2: the χ² between successive iterations reached the
	// stopping value.
	StoppedByChi2 = "chi2"
	// StoppedByMaxIterations: the bound on the iterations was reached
	// before the stopping χ².
	StoppedByMaxIterations = "max_iterations"
)

// model is the prepared problem with its slices at hand for the
// iteration's loops: the dimensions, A, 1/G, eps, 1/eps, the determined
// bins, the data and background as used, the background variance, the
// prior and Σ eps p (see the accessors of unfold.Prepared).
type model struct {
	p                 *unfold.Prepared
	nt, nr            int
	a                 *sparse.Matrix
	invG, eps, invEps []float64
	det               []bool
	n, b, varB, prior []float64
	sumEP             float64
}

func newModel(p *unfold.Prepared) *model {
	m := &model{}
	m.load(p)
	return m
}

// load sets m from p's current state.
func (m *model) load(p *unfold.Prepared) {
	*m = model{
		p: p, nt: p.TruthBins(), nr: p.RecoBins(), a: p.Migrations(),
		invG: p.InvGenerated(), eps: p.Efficiency(), invEps: p.InvEfficiency(), det: p.Determined(),
		n: p.Data(), b: p.Background(), varB: p.BackgroundVariance(),
		prior: p.Prior(), sumEP: p.FoldedPrior(),
	}
}

// scale returns Σ_i (n_i − b_i) / Σ_j eps_j p_j, the factor mapping the
// prior to μ(0), for data n (and the model's background).
func (m *model) scale(n []float64) float64 {
	var s float64
	for _, x := range n {
		s += x
	}
	for _, x := range m.b {
		s -= x
	}
	return s / m.sumEP
}

// rValues returns the values of R = A/G in the order of A's entries.
func (m *model) rValues() []float64 {
	colPtr, val := m.a.ColPtr(), m.a.Values()
	rv := make([]float64, len(val))
	for j := 0; j < m.nt; j++ {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			rv[k] = val[k] * m.invG[j]
		}
	}
	return rv
}

// tangents are linear perturbations carried along the nominal iteration.
// init is called after μ(0), ν(0) are set; step after every iteration,
// while the iterator still holds μ(k), ν(k) and g(k) = Rᵀ(n/ν(k)) (it.mu,
// it.nu, it.g), with μ(k+1) (smoothed) in it.next and R μ(k+1), ν(k+1),
// n/ν(k+1) already in it.fnext, it.nunext, it.ynext.
type tangents interface {
	init(ctx context.Context, it *iterator) error
	step(ctx context.Context, it *iterator) error
}

// iterator holds the state of one iteration sequence.
//
// Each iteration is one SweepRows call: the sweep gathers from y(k) and
// scatters R μ(k+1) into fnext, and its rows hook forms ν(k+1), y(k+1)
// and the log-likelihood partial sum of each fixed row range as soon as
// the range of fnext is final. The hook writes the second buffers
// (nunext, ynext), so the sweep never reads what the hook writes, and
// μ(k), ν(k), g(k) stay available to the tangents until the swap.
type iterator struct {
	m  *model
	sm *smoother
	n  []float64 // data of this sequence

	mu, next, g, tmp []float64 // truth-sized
	orig             []float64 // truth-sized scratch of the smoothing
	fold, fnext      []float64 // reco-sized: R μ(k), R μ(k+1)
	nu, nunext       []float64 // ν(k), ν(k+1); without background they alias fold, fnext
	y, ynext         []float64 // n / ν(k), n / ν(k+1)
	rp               []float64 // R p (the folded prior, Prepared.PriorFold; not ours)
	ranges           []int     // the matrix's fixed row ranges (RowRanges)
	ll               []float64 // log-likelihood partial sum per row range
	red              parallel.Reducer
	keepG            bool // tangents read g: the sweep stores it
	// noLL skips the log-likelihood (every Step.LogLikelihood is 0): for
	// runs whose details nobody reads (toys, re-runs, refits), it saves
	// one logarithm per reco bin and iteration; the estimate is the same.
	noLL bool
	// lazyNu leaves ν(k) = R μ(k) + b unwritten during the iteration (no
	// tangents read it): iterate forms the final one from the final fold,
	// with the bits the per-range pass would have written.
	lazyNu bool
	// updates[keepG][o] is the sweep's update, o = 0 while it.mu is bufA
	// (the first truth buffer), 1 while it is the other (updateFunc).
	updates [2][2]func(j int, g float64) float64
	bufA    []float64
	rows    func(r, lo, hi int)
	// rowsInPlace is rows writing y(k+1) over R μ(k+1) in fnext (see
	// iterate).
	rowsInPlace func(r, lo, hi int)
	// The χ² pass fused into the sweep: the partial sums of compare's
	// chunks (parallel.ChunkLen truth bins each, as parallel.Reducer
	// cuts them), each summed by the column hook that finishes the last
	// of the matrix's column ranges overlapping it. cover[c] is the
	// number of column ranges overlapping chunk c and left[c] counts
	// down the ranges not finished in the current sweep; the hook whose
	// decrement reaches 0 sums the chunk, after the updates of all its
	// columns (the atomic decrements order them before it), so chunks
	// straddling two ranges are summed in the sweep too, on the
	// goroutines running it. fused reports that parts holds μ(k+1)
	// against μ(k).
	parts [][4]float64
	cover []int32
	left  []atomic.Int32
	cols  func(lo, hi int)
	fused bool
}

func newIterator(m *model, sm *smoother) *iterator {
	it := &iterator{
		m: m, sm: sm,
		mu: make([]float64, m.nt), next: make([]float64, m.nt), g: make([]float64, m.nt),
		fold: make([]float64, m.nr), fnext: make([]float64, m.nr),
		y: make([]float64, m.nr), ynext: make([]float64, m.nr), rp: m.p.PriorFold(),
		ranges: m.a.RowRanges(),
	}
	it.ll = make([]float64, len(it.ranges)-1)
	if m.b != nil {
		it.nu, it.nunext = make([]float64, m.nr), make([]float64, m.nr)
	} else {
		it.nu, it.nunext = it.fold, it.fnext // ν = R μ: no copy; swapped together
	}
	it.tmp = make([]float64, m.nt)
	if sm != nil {
		it.orig = make([]float64, m.nt)
	}
	// The updates capture the truth buffers (not the iterator's fields,
	// which swap): one closure per order of the two buffers, with and
	// without storing g.
	invG, invEps, gk := m.invG, m.invEps, it.g
	mk := func(mu, next []float64, keepG bool) func(j int, ga float64) float64 {
		if keepG {
			return func(j int, ga float64) float64 {
				ig := invG[j]
				g := ga * ig // (Rᵀ y)_j from (Aᵀ y)_j
				gk[j] = g
				v := mu[j] * g * invEps[j]
				next[j] = v
				return v * ig // scatter A (μ'/G) = R μ'
			}
		}
		// the same without storing g, when no tangents read it
		return func(j int, ga float64) float64 {
			ig := invG[j]
			v := mu[j] * (ga * ig) * invEps[j]
			next[j] = v
			return v * ig
		}
	}
	it.bufA = it.mu
	it.updates = [2][2]func(int, float64) float64{
		{mk(it.mu, it.next, false), mk(it.next, it.mu, false)},
		{mk(it.mu, it.next, true), mk(it.next, it.mu, true)},
	}
	it.rows = func(r, lo, hi int) {
		it.ll[r] = it.recoRange(it.fnext, it.nunext, it.ynext, lo, hi)
	}
	it.rowsInPlace = func(r, lo, hi int) {
		it.ll[r] = it.recoRange(it.fnext, it.nunext, it.fnext, lo, hi)
	}
	const cl = parallel.ChunkLen
	nc := (m.nt + cl - 1) / cl
	it.parts, it.cover, it.left = make([][4]float64, nc), make([]int32, nc), make([]atomic.Int32, nc)
	cb := m.a.ColRanges()
	for r := 0; r+1 < len(cb); r++ {
		if lo, hi := cb[r], cb[r+1]; lo < hi {
			for c := lo / cl; c <= (hi-1)/cl; c++ {
				it.cover[c]++
			}
		}
	}
	it.cols = func(lo, hi int) {
		if lo >= hi {
			return
		}
		for c := lo / cl; c <= (hi-1)/cl; c++ {
			if it.left[c].Add(-1) == 0 {
				it.parts[c] = it.chunk(c*cl, min(m.nt, (c+1)*cl))
			}
		}
	}
	return it
}

// start sets μ(0) from the prior for data n and returns the start's
// log-likelihood.
func (it *iterator) start(n []float64) float64 {
	it.n = n
	c := it.m.scale(n)
	if c < 0 {
		c = 0 // only for pseudo-data: the estimate stays 0
	}
	for j, p := range it.m.prior {
		it.mu[j] = c * p
	}
	for i, v := range it.rp {
		it.fold[i] = c * v
	}
	return it.reco()
}

// reco computes ν(k) = fold + b and y(k) = n/ν(k) from it.fold and
// returns the log-likelihood.
func (it *iterator) reco() float64 {
	return it.recoAll(it.fold, it.nu, it.y)
}

// recoAll runs recoRange over all row ranges (in parallel) and returns
// the log-likelihood, summed like the SweepRows path: per range, then the
// ranges in order.
func (it *iterator) recoAll(fold, nu, y []float64) float64 {
	rb := it.ranges
	parallel.For(len(it.ll), runtime.GOMAXPROCS(0), func(r int) {
		it.ll[r] = it.recoRange(fold, nu, y, rb[r], rb[r+1])
	})
	return it.sumLL()
}

// sumLL adds the per-range log-likelihood partial sums in range order.
func (it *iterator) sumLL() float64 {
	var s float64
	for _, v := range it.ll {
		s += v
	}
	return s
}

// recoRange sets nu = fold + b (only with a background; otherwise nu
// aliases fold) and y = n/nu over the rows [lo, hi) and returns the
// partial log-likelihood Σ (n_i ln ν_i − ν_i) of those rows, summed in
// row order (0 with it.noLL). It touches nothing outside [lo, hi).
func (it *iterator) recoRange(fold, nu, y []float64, lo, hi int) float64 {
	n, b := it.n, it.m.b
	f := fold[lo:hi]
	nn, yy := n[lo:hi:hi], y[lo:hi:hi]
	nn, yy = nn[:len(f)], yy[:len(f)]
	if it.noLL {
		// the same ν and n/ν, without the logarithms
		switch {
		case b != nil && it.lazyNu:
			ratios(yy, f, b[lo:hi:hi][:len(f)], nn)
		case b != nil:
			bb, vv := b[lo:hi], nu[lo:hi]
			bb, vv = bb[:len(f)], vv[:len(f)]
			for i, v := range f {
				v += bb[i]
				vv[i] = v
				yy[i] = 0
				if v > 0 {
					yy[i] = nn[i] / v
				}
			}
		default:
			ratios(yy, f, nil, nn)
		}
		return 0
	}
	var ll float64
	if b != nil && it.lazyNu {
		bb := b[lo:hi]
		bb = bb[:len(f)]
		for i, v := range f {
			v += bb[i]
			if x := nn[i]; v > 0 {
				yy[i] = x / v
				ll += x*fastLog(v) - v
			} else {
				yy[i] = 0
			}
		}
	} else if b != nil {
		bb, vv := b[lo:hi], nu[lo:hi]
		bb, vv = bb[:len(f)], vv[:len(f)]
		for i, v := range f {
			v += bb[i]
			vv[i] = v
			if x := nn[i]; v > 0 {
				yy[i] = x / v
				ll += x*fastLog(v) - v
			} else {
				yy[i] = 0
			}
		}
	} else {
		for i, v := range f {
			if x := nn[i]; v > 0 {
				yy[i] = x / v
				ll += x*fastLog(v) - v
			} else {
				yy[i] = 0
			}
		}
	}
	return ll
}

// ratiosGo is ratios in Go: y[i] = n[i]/ν_i where ν_i = f[i] (+ b[i]
// when b is not nil) is above 0, and 0 elsewhere (the lengths are those
// of f; y may be f itself).
func ratiosGo(y, f, b, n []float64) {
	y, n = y[:len(f)], n[:len(f)]
	if b != nil {
		b = b[:len(f)]
		for i, v := range f {
			v += b[i]
			y[i] = 0
			if v > 0 {
				y[i] = n[i] / v
			}
		}
		return
	}
	for i, v := range f {
		y[i] = 0
		if v > 0 {
			y[i] = n[i] / v
		}
	}
}

// updateFunc returns the sweep's update from it.mu into it.next, storing
// g into it.g with keepG.
func (it *iterator) updateFunc(keepG bool) func(j int, g float64) float64 {
	k, o := 0, 0
	if keepG {
		k = 1
	}
	if len(it.mu) > 0 && &it.mu[0] != &it.bufA[0] {
		o = 1
	}
	return it.updates[k][o]
}

// How emStep treats the reco side (without smoothing; see iterate).
const (
	recoBoth    = iota // R μ(k+1) in it.fnext, ν(k+1), y(k+1) in it.nunext, it.ynext
	recoInPlace        // y(k+1) over R μ(k+1) in it.fnext
	recoNone           // R μ(k+1) in it.fnext only (no log-likelihood)
)

// emStep computes μ(k+1) into it.next, g(k) into it.g (when it.keepG or
// with smoothing), R μ(k+1) into
// it.fnext, and ν(k+1), y(k+1) into it.nunext, it.ynext; it returns the
// log-likelihood at μ(k+1). it.mu, it.fold, it.nu and it.y are left as
// they were.
func (it *iterator) emStep() float64 { return it.emStepReco(recoBoth) }

// emStepReco is emStep with the reco side of mode (recoBoth with
// smoothing).
func (it *iterator) emStepReco(mode int) float64 {
	m := it.m
	if it.sm == nil {
		upd := it.updateFunc(it.keepG)
		rows := it.rows
		switch mode {
		case recoInPlace:
			rows = it.rowsInPlace
		case recoNone:
			rows = nil
			clear(it.ll)
		}
		for c, n := range it.cover {
			it.left[c].Store(n)
		}
		m.a.SweepHooks(it.fnext, it.y, upd, rows, it.cols)
		it.fused = true
		return it.sumLL()
	}
	m.a.BackProject(it.g, it.y)
	for j, g := range it.g {
		g *= m.invG[j]
		it.g[j] = g
		it.next[j] = it.mu[j] * g * m.invEps[j]
	}
	it.sm.apply(it.next, it.tmp, it.orig)
	m.p.Fold(it.fnext, it.next, it.tmp)
	return it.recoAll(it.fnext, it.nunext, it.ynext)
}

// chunk returns the partial sums of compare over the truth bins
// [lo, hi): the χ² terms, |μ(k+1) − μ(k)| and μ(k+1), each summed in bin
// order.
func (it *iterator) chunk(lo, hi int) [4]float64 {
	mu, next, eps := it.mu[lo:hi], it.next[lo:hi], it.m.eps[lo:hi]
	next, eps = next[:len(mu)], eps[:len(mu)]
	var c2, d, t float64
	for j, x := range next {
		dx := x - mu[j]
		if x > 0 {
			c2 += eps[j] * dx * dx / x
		}
		d += math.Abs(dx)
		t += x
	}
	return [4]float64{c2, d, t}
}

// compare returns the χ² and the relative change between it.next and
// it.mu: the chunks' partial sums added in chunk order, the chunks those
// of parallel.Reducer, so that the sums fused into the sweep (it.fused)
// and those of a separate pass have the same bits.
func (it *iterator) compare() (chi2, change float64) {
	var s [4]float64
	if it.fused {
		it.fused = false
		for _, p := range it.parts {
			for k := range s {
				s[k] += p[k]
			}
		}
	} else {
		s = it.red.Run(len(it.mu), func(lo, hi int, acc *[4]float64) { *acc = it.chunk(lo, hi) })
	}
	chi2 = s[0]
	if t := s[2]; t-t != 0 {
		// A non-finite estimate (overflow or 0·∞ from inputs spanning
		// too many orders of magnitude) makes the iteration fail.
		return math.NaN(), math.NaN()
	}
	if s[2] > 0 {
		change = s[1] / s[2]
	}
	return chi2, change
}

// run iterates from the prior for data n under the stopping rule of rs,
// carrying tan (may be nil) along, and returns the details; the final
// estimate stays in it.mu and its fold in it.nu.
func (it *iterator) run(ctx context.Context, n []float64, rs *resolved, tan tangents) (*Details, error) {
	d := &Details{}
	if err := it.iterate(ctx, n, rs, tan, d); err != nil {
		return nil, err
	}
	return d, nil
}

// iterate runs the iteration, recording History, Iterations and
// Converged into res; the final estimate stays in it.mu and its fold in
// it.nu.
func (it *iterator) iterate(ctx context.Context, n []float64, rs *resolved, tan tangents, res *Details) error {
	if err := ctx.Err(); err != nil {
		return err
	}
	it.lazyNu = false // the start writes ν(0)
	res.History = append(res.History[:0], Step{LogLikelihood: it.start(n)})
	res.Iterations, res.Converged = 0, false
	it.keepG = tan != nil
	if b := it.m.b; tan == nil && b != nil {
		it.lazyNu = true
		defer func() {
			it.lazyNu = false
			for i, f := range it.fold {
				it.nu[i] = f + b[i]
			}
		}()
	}
	if tan != nil {
		if err := tan.init(ctx, it); err != nil {
			return err
		}
	}
	// With a fixed number of iterations and no tangents, nobody reads
	// R μ(k) or ν(k) before the last iteration: y(k) overwrites R μ(k)
	// (one reco vector less to write per iteration), and the last
	// iteration forms only R μ(K) (and ν(K) for the log-likelihood). The
	// values are the same bits.
	inPlace := tan == nil && it.sm == nil && rs.fixed
	for k := 1; k <= rs.maxIter; k++ {
		if err := ctx.Err(); err != nil {
			return err
		}
		mode := recoBoth
		switch {
		case inPlace && k < rs.maxIter:
			mode = recoInPlace
		case inPlace && it.noLL:
			mode = recoNone
		}
		ll := it.emStepReco(mode)
		if tan != nil {
			if err := tan.step(ctx, it); err != nil {
				return err
			}
		}
		chi2, change := it.compare()
		it.mu, it.next = it.next, it.mu
		if mode == recoInPlace {
			it.y, it.fnext = it.fnext, it.y
			if it.m.b == nil {
				it.nunext = it.fnext // ν aliases the fold
			}
		} else {
			it.fold, it.fnext = it.fnext, it.fold
			it.nu, it.nunext = it.nunext, it.nu
			it.y, it.ynext = it.ynext, it.y
		}
		if math.IsNaN(ll) || math.IsInf(ll, 0) || math.IsNaN(chi2) || math.IsInf(chi2, 0) {
			return nonFinite(k)
		}
		res.History = append(res.History, Step{Iteration: k, Chi2: chi2, Change: change, LogLikelihood: ll})
		res.Iterations = k
		if !rs.fixed && chi2 <= rs.StopChi2 {
			res.Converged = true
			break
		}
	}
	switch {
	case rs.fixed:
		res.StoppedBy = StoppedByIterations
	case res.Converged:
		res.StoppedBy = StoppedByChi2
	default:
		res.StoppedBy = StoppedByMaxIterations
	}
	return nil
}
