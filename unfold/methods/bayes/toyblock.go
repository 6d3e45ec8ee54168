package bayes

import (
	"context"
	"math"
	"runtime"
	"slices"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// perToy makes the method's fits run their toys one by one (the path
// before the blocks; benchmarks and tests compare the two).
var perToy = false

// NewToyBlockRunner returns a runner unfolding blocks of up to
// unfold.ToyBlock toys together as many times as the nominal iteration
// did (unfold.ToyBlocker), or nil with smoothing, whose toys run one by
// one (NewToyRunner).
func (f *fit) NewToyBlockRunner() unfold.ToyBlockRunner {
	if f.sm != nil || perToy {
		return nil
	}
	return newToyBlock(f.m, f.details.Iterations, f.kept != nil)
}

// toyBlock unfolds the toys of a block together: one sparse.SweepBlock
// per iteration reads the matrix once for all of them, with the block's
// reco vectors interleaved (element i of toy s of a block of k toys at
// i·k+s). Toys always make the fixed number of iterations of the nominal
// fit (there is no stopping rule to apply per toy). Every toy gets
// exactly the bits of a toyRunner of its own:
//
//   - SweepBlock sums every vector as Sweep does, and the update forms
//     μ_j(k+1) = μ_j(k) (g_j/G_j) / eps_j per toy with the expression of
//     the single iteration;
//   - the reco pass between sweeps forms n/ν per toy and reco bin, with
//     ν = R μ + b, as the single iteration's rows hook does;
//   - the χ² and Σ μ(k+1) of each toy, whose finiteness decides the
//     overflow error, are summed in the single iteration's chunks
//     (parallel.ChunkLen truth bins, in bin order), inside the update for
//     the chunks within one column block of the matrix, after the sweep
//     for those straddling two, and the chunks in order.
//
// The truth vectors μ(k), μ(k+1) of the block are interleaved too (bin
// j of toy s at j·k+s), so that the update reads and writes each
// column's values of all the toys together; the estimates are copied out
// toy by toy when reported.
//
// Memory: per toy of the block three truth vectors (μ(k), μ(k+1), the
// estimate returned), and the block's three interleaved reco vectors (n/ν,
// the sweep's destination and the data); unfold counts them, the toys' data and
// the sweep's scatter buffers against the memory limit.
type toyBlock struct {
	m     *model
	iters int
	steps bool // report every step (the fit keeps its iterations)

	n, b     [][]float64 // the block's data and backgrounds (b[s] nil: the model's)
	mu, next []float64   // interleaved: μ(k), μ(k+1)
	est      [][]float64 // per toy: the estimate reported
	y, fnext []float64   // interleaved: n/ν(k), the sweep's destination
	nd       []float64   // interleaved: the block's data
	// parts holds, per chunk c and toy s at c·ToyBlock+s, the χ² terms
	// and Σ μ(k+1) of the chunk; straddles marks the chunks straddling
	// two column blocks, straddle lists them.
	parts     [][2]float64
	straddles []bool
	straddle  []int
	update    func(j int, g, x []float64)
	scale     []float64 // per toy: the start's factor
}

func newToyBlock(m *model, iters int, steps bool) *toyBlock {
	const B, cl = unfold.ToyBlock, parallel.ChunkLen
	tb := &toyBlock{m: m, iters: iters, steps: steps,
		y: make([]float64, B*m.nr), fnext: make([]float64, B*m.nr), nd: make([]float64, B*m.nr), scale: make([]float64, B)}
	tb.mu, tb.next = make([]float64, B*m.nt), make([]float64, B*m.nt)
	for range B {
		tb.est = append(tb.est, make([]float64, m.nt))
	}
	nc := (m.nt + cl - 1) / cl
	tb.parts = make([][2]float64, nc*B)
	tb.straddles = make([]bool, nc)
	cb := m.a.ColRanges()
	for c := range nc {
		lo, hi := c*cl, min(m.nt, (c+1)*cl)
		k, _ := slices.BinarySearch(cb, lo+1) // first bound above lo
		if k < len(cb) && cb[k] < hi {
			tb.straddles[c] = true
			tb.straddle = append(tb.straddle, c)
		}
	}
	invG, invEps, eps := m.invG, m.invEps, m.eps
	tb.update = func(j int, g, x []float64) {
		ig, ie, e := invG[j], invEps[j], eps[j]
		c := j / cl
		own := !tb.straddles[c]
		acc := tb.parts[c*B : c*B+len(x)]
		if own && j == c*cl {
			clear(acc) // the chunk's first bin: its sums start
		}
		k := len(x)
		mu, next := tb.mu[j*k:j*k+k], tb.next[j*k:j*k+k]
		for s, ga := range g[:k] {
			old := mu[s]
			v := old * (ga * ig) * ie // as the single iteration's update
			next[s] = v
			x[s] = v * ig // scatter A (μ'/G) = R μ'
			if own {
				// the terms of iterator.chunk, in bin order
				dx := v - old
				if v > 0 {
					acc[s][0] += e * dx * dx / v
				}
				acc[s][1] += v
			}
		}
	}
	return tb
}

// RunBlock unfolds the toys of data n[s] (and backgrounds b[s]) together
// (unfold.ToyBlockRunner).
func (tb *toyBlock) RunBlock(ctx context.Context, n, b [][]float64, each func(s, k int, est []float64)) ([][]float64, error) {
	k := len(n)
	if k < 1 || k > unfold.ToyBlock || (b != nil && len(b) != k) {
		panic("bayes: a block of toys of the wrong size")
	}
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	m := tb.m
	tb.n, tb.b = n, tb.b[:0]
	for s := range k {
		bs := m.b
		if b != nil {
			bs = b[s]
		}
		tb.b = append(tb.b, bs)
	}
	if !tb.steps {
		each = nil
	}
	y, fnext := tb.y[:k*m.nr], tb.fnext[:k*m.nr]
	tb.interleave(k)
	tb.start(y, k)
	tb.report(0, k, each)
	for it := 1; it <= tb.iters; it++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		m.a.SweepBlock(fnext, y, k, tb.update)
		if err := tb.check(it, k); err != nil {
			return nil, err
		}
		tb.mu, tb.next = tb.next, tb.mu
		if it < tb.iters {
			tb.reco(fnext, k) // n/ν(k) over R μ(k): the next sweep's y
			y, fnext = fnext, y
		}
		tb.report(it, k, each)
	}
	if each == nil {
		tb.copyOut(k, -1)
	}
	return tb.est[:k], nil
}

// report hands each the estimate of step it of every toy (nothing when
// each is nil).
func (tb *toyBlock) report(it, k int, each func(s, k int, est []float64)) {
	if each == nil {
		return
	}
	for s := range k {
		tb.copyOut(k, s)
		each(s, it, tb.est[s])
	}
}

// copyOut copies μ of toy s (of every toy when s < 0) out of the
// interleaved vector into its estimate.
func (tb *toyBlock) copyOut(k, s int) {
	mu := tb.mu[:k*tb.m.nt]
	if s >= 0 {
		est := tb.est[s]
		for j := range est {
			est[j] = mu[j*k+s]
		}
		return
	}
	est := tb.est[:k]
	parallel.For(tb.chunks(tb.m.nt), runtime.GOMAXPROCS(0), func(c int) {
		lo, hi := c*parallel.ChunkLen, min(tb.m.nt, (c+1)*parallel.ChunkLen)
		for j := lo; j < hi; j++ {
			row := mu[j*k : j*k+k]
			for s, v := range row {
				est[s][j] = v
			}
		}
	})
}

// start sets μ(0) of every toy from the prior, scaled to the toy's data
// as iterator.start does, and its n/ν(0) into y.
func (tb *toyBlock) start(y []float64, k int) {
	m := tb.m
	for s := range k {
		ms := *m
		ms.b = tb.b[s]
		c := ms.scale(tb.n[s])
		if c < 0 {
			c = 0 // only for pseudo-data: the estimate stays 0
		}
		tb.scale[s] = c
	}
	rp, sc, mu := m.p.PriorFold(), tb.scale[:k], tb.mu
	parallel.For(tb.chunks(m.nt), runtime.GOMAXPROCS(0), func(q int) {
		lo, hi := q*parallel.ChunkLen, min(m.nt, (q+1)*parallel.ChunkLen)
		for j := lo; j < hi; j++ {
			row := mu[j*k : j*k+k]
			for s, c := range sc {
				row[s] = c * m.prior[j] // μ(0), as iterator.start sets it
			}
		}
	})
	parallel.For(tb.chunks(m.nr), runtime.GOMAXPROCS(0), func(r int) {
		lo, hi := r*parallel.ChunkLen, min(m.nr, (r+1)*parallel.ChunkLen)
		for i := lo; i < hi; i++ {
			row := y[i*k : i*k+k]
			for s, c := range sc {
				row[s] = c * rp[i] // R μ(0), as iterator.start folds it
			}
		}
	})
	tb.reco(y, k)
}

// chunks returns the number of chunks of n bins of the passes over the
// block's vectors.
func (tb *toyBlock) chunks(n int) int {
	return (n + parallel.ChunkLen - 1) / parallel.ChunkLen
}

// reco replaces the interleaved fold f by n/ν with ν = f + b (0 where
// ν ≤ 0) for every toy and reco bin, the arithmetic of
// iterator.recoRange without the log-likelihood: chunk by chunk, the
// backgrounds are added in place (read once per bin when the toys share
// the model's) and the division is the ratios loop (AVX where the
// processor has it, the same bits) over the chunk's interleaved values
// and the block's interleaved data tb.nd.
func (tb *toyBlock) reco(f []float64, k int) {
	b := tb.b[:k]
	shared := true // every toy has the model's background
	for _, bs := range b {
		shared = shared && sameSlice(bs, tb.m.b)
	}
	nd := tb.nd[:k*tb.m.nr]
	parallel.For(tb.chunks(tb.m.nr), runtime.GOMAXPROCS(0), func(r int) {
		lo, hi := r*parallel.ChunkLen, min(tb.m.nr, (r+1)*parallel.ChunkLen)
		switch {
		case shared && tb.m.b != nil:
			for i, bi := range tb.m.b[lo:hi] {
				row := f[(lo+i)*k : (lo+i)*k+k]
				for s := range row {
					row[s] += bi
				}
			}
		case !shared:
			for i := lo; i < hi; i++ {
				row := f[i*k : i*k+k]
				for s := range row {
					if bs := b[s]; bs != nil {
						row[s] += bs[i]
					}
				}
			}
		}
		ratios(f[lo*k:hi*k], f[lo*k:hi*k], nil, nd[lo*k:hi*k])
	})
}

// sameSlice reports whether a and b are the same slice (the same first
// element and length; both nil counts).
func sameSlice(a, b []float64) bool {
	return len(a) == len(b) && (len(a) == 0 || &a[0] == &b[0])
}

// interleave copies the data of the block's toys into tb.nd, bin i of
// toy s at i·k+s.
func (tb *toyBlock) interleave(k int) {
	n, nd := tb.n[:k], tb.nd[:k*tb.m.nr]
	parallel.For(tb.chunks(tb.m.nr), runtime.GOMAXPROCS(0), func(r int) {
		lo, hi := r*parallel.ChunkLen, min(tb.m.nr, (r+1)*parallel.ChunkLen)
		for s, ns := range n {
			for i, v := range ns[lo:hi] {
				nd[(lo+i)*k+s] = v
			}
		}
	})
}

// check sums the χ² and Σ μ(k+1) of every toy after the sweep of
// iteration it (the straddling chunks now, then the chunks in order) and
// returns the error of the single iteration when one is not finite.
func (tb *toyBlock) check(it, k int) error {
	const B, cl = unfold.ToyBlock, parallel.ChunkLen
	m := tb.m
	mu, next := tb.mu[:k*m.nt], tb.next[:k*m.nt]
	parallel.For(len(tb.straddle), runtime.GOMAXPROCS(0), func(q int) {
		c := tb.straddle[q]
		lo, hi := c*cl, min(m.nt, (c+1)*cl)
		// bin by bin, the toys inside: per toy the sums of
		// iterator.chunk in bin order
		var acc [B][2]float64
		for j := lo; j < hi; j++ {
			e, old, nv := m.eps[j], mu[j*k:j*k+k], next[j*k:j*k+k]
			for s, x := range nv {
				dx := x - old[s]
				if x > 0 {
					acc[s][0] += e * dx * dx / x
				}
				acc[s][1] += x
			}
		}
		copy(tb.parts[c*B:c*B+k], acc[:k])
	})
	nc := len(tb.straddles)
	for s := range k {
		var c2, t float64
		for c := range nc {
			p := tb.parts[c*B+s]
			c2 += p[0]
			t += p[1]
		}
		if t-t != 0 || math.IsNaN(c2) || math.IsInf(c2, 0) {
			return nonFinite(it)
		}
	}
	return nil
}

// nonFinite is the error of an iteration it at which a non-finite value
// appeared.
func nonFinite(it int) error {
	return &unfold.NumericalError{Iteration: it, Reason: "a non-finite value appeared (overflow or underflow: the response, generated counts and data span more orders of magnitude than the iteration can hold); rescale them, for example to counts of order 1 or more"}
}
