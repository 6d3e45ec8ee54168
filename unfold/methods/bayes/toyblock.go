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
// Memory: per toy of the block two truth vectors (μ(k), μ(k+1)), and
// the block's two interleaved reco vectors (n/ν and the sweep's
// destination); unfold counts them, the toys' data and the sweep's
// scatter buffers against the memory limit.
type toyBlock struct {
	m     *model
	iters int
	steps bool // report every step (the fit keeps its iterations)

	n, b     [][]float64 // the block's data and backgrounds (b[s] nil: the model's)
	mu, next [][]float64 // per toy: μ(k), μ(k+1)
	y, fnext []float64   // interleaved: n/ν(k), the sweep's destination
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
		y: make([]float64, B*m.nr), fnext: make([]float64, B*m.nr), scale: make([]float64, B)}
	for range B {
		tb.mu = append(tb.mu, make([]float64, m.nt))
		tb.next = append(tb.next, make([]float64, m.nt))
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
		mu, next := tb.mu[:len(x)], tb.next[:len(x)]
		for s, ga := range g[:len(x)] {
			old := mu[s][j]
			v := old * (ga * ig) * ie // as the single iteration's update
			next[s][j] = v
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
	tb.start(y, k)
	if each != nil {
		for s := range k {
			each(s, 0, tb.mu[s])
		}
	}
	for it := 1; it <= tb.iters; it++ {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		m.a.SweepBlock(fnext, y, k, tb.update)
		if err := tb.check(it, k); err != nil {
			return nil, err
		}
		for s := range k {
			tb.mu[s], tb.next[s] = tb.next[s], tb.mu[s]
		}
		if it < tb.iters {
			tb.reco(fnext, fnext, k) // n/ν(k) over R μ(k): the next sweep's y
			y, fnext = fnext, y
		}
		if each != nil {
			for s := range k {
				each(s, it, tb.mu[s])
			}
		}
	}
	return tb.mu[:k], nil
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
	parallel.For(k, runtime.GOMAXPROCS(0), func(s int) {
		c, mu := tb.scale[s], tb.mu[s]
		for j, p := range m.prior {
			mu[j] = c * p
		}
	})
	rp, sc := m.p.PriorFold(), tb.scale[:k]
	parallel.For(tb.rowChunks(), runtime.GOMAXPROCS(0), func(r int) {
		lo, hi := r*parallel.ChunkLen, min(m.nr, (r+1)*parallel.ChunkLen)
		for i := lo; i < hi; i++ {
			row := y[i*k : i*k+k]
			for s, c := range sc {
				row[s] = c * rp[i] // R μ(0), as iterator.start folds it
			}
		}
	})
	tb.reco(y, y, k)
}

// rowChunks returns the number of chunks of reco bins of the reco pass.
func (tb *toyBlock) rowChunks() int {
	return (tb.m.nr + parallel.ChunkLen - 1) / parallel.ChunkLen
}

// reco writes y = n/ν with ν = fold + b (0 where ν ≤ 0) for every toy
// and reco bin of the interleaved fold, the arithmetic of
// iterator.recoRange without the log-likelihood; y may be fold.
func (tb *toyBlock) reco(y, fold []float64, k int) {
	n, b := tb.n[:k], tb.b[:k]
	parallel.For(tb.rowChunks(), runtime.GOMAXPROCS(0), func(r int) {
		lo, hi := r*parallel.ChunkLen, min(tb.m.nr, (r+1)*parallel.ChunkLen)
		// reco bin by reco bin, the toys of the block inside, so that
		// the interleaved vectors are read and written in order
		for i := lo; i < hi; i++ {
			f, yy := fold[i*k:i*k+k], y[i*k:i*k+k]
			for s, v := range f {
				if bs := b[s]; bs != nil {
					v += bs[i]
				}
				w := 0.0
				if v > 0 {
					w = n[s][i] / v
				}
				yy[s] = w
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
	for _, c := range tb.straddle {
		lo, hi := c*cl, min(m.nt, (c+1)*cl)
		for s := range k {
			mu, next := tb.mu[s][lo:hi], tb.next[s][lo:hi]
			next = next[:len(mu)]
			var c2, t float64
			for j, x := range next {
				dx := x - mu[j]
				if x > 0 {
					c2 += m.eps[lo+j] * dx * dx / x
				}
				t += x
			}
			tb.parts[c*B+s] = [2]float64{c2, t}
		}
	}
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
