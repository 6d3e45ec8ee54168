package bayes

import (
	"context"
	"math"
	"runtime"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// probes carries random Jacobian-vector products along the iteration:
// for probe s, the perturbation dn_i = ±σ(n_i), db_i = ±σ(b_i) (random
// signs, Rademacher) is propagated through the same linearised recursion
// as the dense Jacobian, one fold and one back-projection per probe and
// iteration. E[(dμ_j)²] is the variance of μ_j.
//
// Without smoothing the probes go in blocks of unfold.ProbeBlock: one
// SweepBlock per block and iteration reads the matrix once for all of
// them, with the block's reco vectors interleaved (element i of probe
// s of the block at i·k+s). A last block of fewer probes in a batch of
// at least one full block is swept as a full one, its missing probes
// held at 0. Each probe gets the bits of a Sweep of its own (SweepBlock
// sums every vector as Sweep does), so the results do not depend on the
// blocks. The start's tangents dμ_s = c_s p and R dμ_s = c_s R p stay
// implicit (fresh): the first step forms them where it reads them, with
// the same products, instead of a pass writing them. With smoothing (or with perProbe, for the
// benchmarks) every probe makes a Sweep, or a back-projection, the
// smoothing and a fold, of its own.
type probes struct {
	m     *model
	count int
	sdN   []float64 // σ(n_i)
	sdB   []float64 // σ(b_i), nil when not propagated
	dmu   [][]float64
	tfold [][]float64 // R dμ; per block, interleaved, when blocked
	signN [][]uint64
	signB [][]uint64
	batch *unfold.Probes
	work  []probeWork
	a     []float64 // σ(n)/ν of the current iteration (0 where ν = 0)
	w     []float64 // n/ν² of the current iteration
	c     []float64 // σ(b) n/ν² (nil when the background variance is not propagated)
	red   parallel.Reducer

	blocked bool
	made    int       // the number of probes the buffers were made for
	spare   []float64 // the sweep's destination of a block (interleaved)
	update  func(j int, g, x []float64)
	cur     int // first probe of the block being swept
	curK    int // its number of probes (the sweep's vectors may be more: lanes)
	// fresh reports that the tangents are the start's, implicit: dμ_s =
	// c_s p and R dμ_s = c_s R p (c_s in c0); dμ_s is written only when
	// the driver records the steps.
	fresh bool
	it    *iterator
	k     int       // the iteration the tangents hold
	c0    []float64 // the probes' starting factors c_s (init)
}

// perProbe makes every probe of the method's fits sweep on its own (the
// path before the blocks; benchmarks compare the two).
var perProbe = false

type probeWork struct {
	y, spare, gt []float64
	orig         []float64 // scratch of the smoothing
	update       func(j int, g float64) float64
	dmu          []float64
	it           *iterator
}

// newProbes prepares the recursion of the probes of batch, whose
// tangents dμ_s it fills, in blocks (only without smoothing) or one by
// one.
func newProbes(m *model, batch *unfold.Probes, blocked bool) *probes {
	pr := &probes{m: m, count: batch.Len(), made: batch.Len(), blocked: blocked}
	pr.rebind(batch)
	for s := 0; s < pr.count; s++ {
		if !pr.blocked {
			pr.tfold = append(pr.tfold, make([]float64, m.nr))
		} else if s%unfold.ProbeBlock == 0 {
			// every block can take the spare buffer in turn: full capacity
			pr.tfold = append(pr.tfold, make([]float64, pr.lanes(s)*m.nr, pr.lanes(0)*m.nr))
		}
	}
	pr.a = make([]float64, m.nr)
	pr.w = make([]float64, m.nr)
	if pr.sdB != nil {
		pr.c = make([]float64, m.nr)
	}
	if pr.blocked {
		pr.spare = make([]float64, pr.lanes(0)*m.nr)
		pr.update = func(j int, g, x []float64) {
			it, ig, ie := pr.it, m.invG[j], m.invEps[j]
			gj, muj := it.g[j], it.mu[j]
			k := pr.curK
			dmu := pr.dmu[pr.cur : pr.cur+k]
			switch {
			case pr.fresh && k == 8:
				// dμ_s = c_s p: the product init would have stored
				d, c8, g8, x8 := (*[8][]float64)(dmu), (*[8]float64)(pr.c0[pr.cur:]), (*[8]float64)(g), (*[8]float64)(x)
				pj := m.prior[j]
				for s := range 8 {
					v := (gj*(c8[s]*pj) + muj*g8[s]*ig) * ie
					d[s][j] = v
					x8[s] = v * ig
				}
			case pr.fresh:
				c, pj := pr.c0[pr.cur:pr.cur+k], m.prior[j]
				for s, ds := range dmu {
					v := (gj*(c[s]*pj) + muj*g[s]*ig) * ie
					ds[j] = v
					x[s] = v * ig
				}
				clear(x[k:]) // the lanes without a probe stay 0
			case k == 8:
				// the same, with fixed-size arrays: fewer bounds checks
				d, g8, x8 := (*[8][]float64)(dmu), (*[8]float64)(g), (*[8]float64)(x)
				for s := range 8 {
					ds := d[s]
					v := (gj*ds[j] + muj*g8[s]*ig) * ie
					ds[j] = v
					x8[s] = v * ig
				}
			default:
				for s, ds := range dmu {
					v := (gj*ds[j] + muj*g[s]*ig) * ie
					ds[j] = v
					x[s] = v * ig
				}
				clear(x[k:])
			}
		}
		return pr
	}
	workers := min(runtime.GOMAXPROCS(0), pr.count)
	pr.work = make([]probeWork, workers)
	for w := range pr.work {
		pw := &pr.work[w]
		pw.y = make([]float64, m.nr)
		pw.spare = make([]float64, m.nr)
		pw.gt = make([]float64, m.nt)
		pw.orig = make([]float64, m.nt)
		pw.update = func(j int, ga float64) float64 {
			it := pw.it
			v := (it.g[j]*pw.dmu[j] + it.mu[j]*ga*m.invG[j]) * m.invEps[j]
			pw.dmu[j] = v
			return v * m.invG[j]
		}
	}
	return pr
}

// rebind points pr at the signs and tangents of batch, which has pr.count
// probes.
func (pr *probes) rebind(batch *unfold.Probes) {
	pr.batch, pr.sdN, pr.sdB = batch, batch.DataSD(), batch.BackgroundSD()
	pr.signN, pr.signB, pr.dmu = pr.signN[:0], pr.signB[:0], pr.dmu[:0]
	for s := 0; s < pr.count; s++ {
		sn, sb := batch.Signs(s)
		pr.signN = append(pr.signN, sn)
		if sb != nil {
			pr.signB = append(pr.signB, sb)
		}
		pr.dmu = append(pr.dmu, batch.Tangent(s))
	}
}

// reuse prepares pr, made for at least as many probes as batch has, for
// batch, keeping its buffers.
func (pr *probes) reuse(batch *unfold.Probes) {
	pr.count = batch.Len()
	if pr.blocked {
		pr.tfold = pr.tfold[:(pr.count+unfold.ProbeBlock-1)/unfold.ProbeBlock]
		for b := range pr.tfold {
			pr.tfold[b] = pr.tfold[b][:pr.lanes(b*unfold.ProbeBlock)*pr.m.nr]
		}
	} else {
		pr.tfold = pr.tfold[:pr.count]
	}
	pr.rebind(batch)
}

// width returns the number of probes of the block starting at probe s.
func (pr *probes) width(s int) int { return min(unfold.ProbeBlock, pr.count-s) }

// lanes returns the number of interleaved vectors of the block starting
// at probe s: a full block's when the batch has one (a shorter last block
// takes the 8-vector sweep, its buffers having that capacity anyway),
// otherwise its probes'.
func (pr *probes) lanes(s int) int {
	if pr.count >= unfold.ProbeBlock {
		return unfold.ProbeBlock
	}
	return pr.width(s)
}

func (pr *probes) init(ctx context.Context, it *iterator) error {
	m := pr.m
	workers := runtime.GOMAXPROCS(0)
	if len(pr.c0) < pr.count {
		pr.c0 = make([]float64, pr.made)
	}
	c0 := pr.c0[:pr.count]
	// dμ_s = c_s p with c_s = (Σ dn − Σ db)/Σ ε p, probe by probe (each
	// goroutine writes vectors of its own probes only); in blocks the
	// first step forms dμ_s and R dμ_s = c_s R p itself (fresh), and
	// dμ_s is written here only for the driver recording the steps
	write := !pr.blocked || pr.batch.RecordsSteps()
	parallel.For(pr.count, workers, func(s int) {
		c := pr.batch.Net(s) / m.sumEP
		c0[s] = c
		if write {
			for j, p := range m.prior {
				pr.dmu[s][j] = c * p
			}
		}
		if !pr.blocked {
			for i, v := range it.rp {
				pr.tfold[s][i] = c * v
			}
		}
	})
	pr.fresh = pr.blocked
	if err := ctx.Err(); err != nil {
		return err
	}
	pr.k = 0
	pr.batch.Step(0)
	return nil
}

func (pr *probes) step(ctx context.Context, it *iterator) error {
	n, nu, a, w, c := it.n, it.nu, pr.a, pr.w, pr.c
	pr.red.Run(len(nu), func(lo, hi int, _ *[4]float64) {
		for i := lo; i < hi; i++ {
			if v := nu[i]; v > 0 {
				inv := 1 / v
				a[i] = pr.sdN[i] * inv
				w[i] = n[i] * inv * inv
			} else {
				a[i], w[i] = 0, 0
			}
			if c != nil {
				c[i] = w[i] * pr.sdB[i]
			}
		}
	})
	if pr.blocked {
		if it.sm != nil {
			panic("bayes: probes in blocks with smoothing")
		}
		if err := pr.stepBlocks(ctx, it); err != nil {
			return err
		}
		pr.fresh = false
		pr.k++
		pr.batch.Step(pr.k)
		return nil
	}
	// Probes run on separate goroutines; each Sweep is itself
	// deterministic, so the bits do not depend on the scheduling.
	work := make(chan int, pr.count)
	for s := 0; s < pr.count; s++ {
		work <- s
	}
	close(work)
	done := make(chan struct{}, len(pr.work))
	for w := range pr.work {
		go func(pw *probeWork) {
			defer func() { done <- struct{}{} }()
			pw.it = it
			for s := range work {
				if ctx.Err() != nil {
					return
				}
				pr.one(pw, it, s)
			}
		}(&pr.work[w])
	}
	for range pr.work {
		<-done
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	pr.k++
	pr.batch.Step(pr.k)
	return nil
}

// one advances probe s by one iteration.
func (pr *probes) one(pw *probeWork, it *iterator, s int) {
	m := pr.m
	// y = dn/ν − n (R dμ + db)/ν² with dn = ±σ(n), db = ±σ(b): the sign
	// of a_i (and c_i) is flipped through its sign bit where the probe's
	// bit is 0.
	a, w, c, tf, y := pr.a, pr.w, pr.c, pr.tfold[s], pw.y
	sn := pr.signN[s]
	var sb []uint64
	if c != nil {
		sb = pr.signB[s]
	}
	for wi, word := range sn {
		lo := wi * 64
		hi := min(lo+64, len(y))
		aa, ww, tt, yy := a[lo:hi], w[lo:hi], tf[lo:hi], y[lo:hi]
		aa, ww, tt = aa[:len(yy)], ww[:len(yy)], tt[:len(yy)]
		nw := ^word
		for k := range yy {
			flip := (nw >> uint(k) & 1) << 63
			yy[k] = math.Float64frombits(math.Float64bits(aa[k])^flip) - ww[k]*tt[k]
		}
		if sb != nil {
			cc := c[lo:hi]
			cc = cc[:len(yy)]
			nb := ^sb[wi]
			for k := range yy {
				flip := (nb >> uint(k) & 1) << 63
				yy[k] -= math.Float64frombits(math.Float64bits(cc[k]) ^ flip)
			}
		}
	}
	pw.dmu = pr.dmu[s]
	next := pw.spare
	if it.sm == nil {
		m.a.Sweep(next, y, pw.update)
	} else {
		m.a.BackProject(pw.gt, y)
		for j, ga := range pw.gt {
			pw.dmu[j] = (it.g[j]*pw.dmu[j] + it.mu[j]*ga*m.invG[j]) * m.invEps[j]
		}
		// it.tmp is shared between probes; use the private scratch
		it.sm.apply(pw.dmu, pw.gt, pw.orig)
		m.p.Fold(next, pw.dmu, pw.gt)
	}
	pr.tfold[s], pw.spare = next, tf
}

// stepBlocks advances the probes by one iteration, block by block: the
// block's y = dn/ν − n (R dμ + db)/ν² overwrites its R dμ (no longer
// needed; fresh: c_s R p, formed here), and one SweepBlock gives the new
// dμ and R dμ of every probe of the block. Lanes without a probe get
// y = 0.
func (pr *probes) stepBlocks(ctx context.Context, it *iterator) error {
	a, w, c := pr.a, pr.w, pr.c
	fresh, rp := pr.fresh, it.rp
	pr.it = it
	for b, tf := range pr.tfold {
		if err := ctx.Err(); err != nil {
			return err
		}
		first := b * unfold.ProbeBlock
		k, kl := pr.width(first), pr.lanes(first)
		c0 := pr.c0[first : first+k]
		sn := pr.signN[first : first+k]
		var sb [][]uint64
		if c != nil {
			sb = pr.signB[first : first+k]
		}
		pr.red.Run(len(a), func(lo, hi int, _ *[4]float64) {
			// reco bin by reco bin, the probes of the block inside: the
			// same arithmetic per element as probe by probe, written in
			// the order of the interleaved vectors; the probes' sign
			// words are read once per 64 reco bins
			var nn, nb [unfold.ProbeBlock]uint64 // the signs, negated
			for i0 := lo; i0 < hi; {
				word := i0 >> 6
				i1 := min((word+1)<<6, hi)
				for o := range k {
					nn[o] = ^sn[o][word]
					if sb != nil {
						nb[o] = ^sb[o][word]
					}
				}
				if k == 8 && sb == nil {
					if fresh {
						blockY8Start(tf[8*i0:8*i1], a[i0:i1], w[i0:i1], rp[i0:i1], (*[8]float64)(c0), &nn, uint(i0)&63)
					} else {
						blockY8(tf[8*i0:8*i1], a[i0:i1], w[i0:i1], &nn, uint(i0)&63)
					}
					i0 = i1
					continue
				}
				for i := i0; i < i1; i++ {
					bit := uint(i) & 63
					ai, wi := math.Float64bits(a[i]), w[i]
					row := tf[i*kl : i*kl+kl]
					for o := range k {
						var t float64 // R dμ
						if fresh {
							t = c0[o] * rp[i]
						} else {
							t = row[o]
						}
						flip := (nn[o] >> bit & 1) << 63
						y := math.Float64frombits(ai^flip) - wi*t
						if sb != nil {
							flip := (nb[o] >> bit & 1) << 63
							y -= math.Float64frombits(math.Float64bits(c[i]) ^ flip)
						}
						row[o] = y
					}
					clear(row[k:])
				}
				i0 = i1
			}
		})
		pr.cur, pr.curK = first, k
		next := pr.spare[:kl*len(a)]
		pr.m.a.SweepBlock(next, tf, kl, pr.update)
		pr.tfold[b], pr.spare = next, tf[:cap(tf)]
	}
	return nil
}

// blockY8Start is blockY8 at the start, where R dμ_o = c[o]·rp_i: row i
// of tf becomes ±a_i − w_i·(c[o]·rp_i), the product blockY8 would have
// read from tf.
func blockY8Start(tf, a, w, rp []float64, c *[8]float64, nn *[unfold.ProbeBlock]uint64, bit0 uint) {
	w, rp = w[:len(a)], rp[:len(a)]
	for i, av := range a {
		bit := bit0 + uint(i)
		ai, wi, v := math.Float64bits(av), w[i], rp[i]
		row := (*[8]float64)(tf[8*i : 8*i+8])
		row[0] = math.Float64frombits(ai^(nn[0]>>bit&1)<<63) - wi*(c[0]*v)
		row[1] = math.Float64frombits(ai^(nn[1]>>bit&1)<<63) - wi*(c[1]*v)
		row[2] = math.Float64frombits(ai^(nn[2]>>bit&1)<<63) - wi*(c[2]*v)
		row[3] = math.Float64frombits(ai^(nn[3]>>bit&1)<<63) - wi*(c[3]*v)
		row[4] = math.Float64frombits(ai^(nn[4]>>bit&1)<<63) - wi*(c[4]*v)
		row[5] = math.Float64frombits(ai^(nn[5]>>bit&1)<<63) - wi*(c[5]*v)
		row[6] = math.Float64frombits(ai^(nn[6]>>bit&1)<<63) - wi*(c[6]*v)
		row[7] = math.Float64frombits(ai^(nn[7]>>bit&1)<<63) - wi*(c[7]*v)
	}
}

// blockY8 is the y pass of stepBlocks for a block of 8 probes without a
// background variance, over reco bins of one word of signs starting at
// bit bit0: row i of tf (8 interleaved probes) becomes ±a_i − w_i·tf, with
// the sign of probe o from bit bit0+i of nn[o] (set: minus).
func blockY8(tf, a, w []float64, nn *[unfold.ProbeBlock]uint64, bit0 uint) {
	w = w[:len(a)]
	for i, av := range a {
		bit := bit0 + uint(i)
		ai, wi := math.Float64bits(av), w[i]
		row := (*[8]float64)(tf[8*i : 8*i+8])
		row[0] = math.Float64frombits(ai^(nn[0]>>bit&1)<<63) - wi*row[0]
		row[1] = math.Float64frombits(ai^(nn[1]>>bit&1)<<63) - wi*row[1]
		row[2] = math.Float64frombits(ai^(nn[2]>>bit&1)<<63) - wi*row[2]
		row[3] = math.Float64frombits(ai^(nn[3]>>bit&1)<<63) - wi*row[3]
		row[4] = math.Float64frombits(ai^(nn[4]>>bit&1)<<63) - wi*row[4]
		row[5] = math.Float64frombits(ai^(nn[5]>>bit&1)<<63) - wi*row[5]
		row[6] = math.Float64frombits(ai^(nn[6]>>bit&1)<<63) - wi*row[6]
		row[7] = math.Float64frombits(ai^(nn[7]>>bit&1)<<63) - wi*row[7]
	}
}
