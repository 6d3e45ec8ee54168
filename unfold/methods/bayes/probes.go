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
// iteration (a fused Sweep). E[(dμ_j)²] is the variance of μ_j.
type probes struct {
	m     *model
	count int
	sdN   []float64 // σ(n_i)
	sdB   []float64 // σ(b_i), nil when not propagated
	dmu   [][]float64
	tfold [][]float64 // R dμ
	signN [][]uint64
	signB [][]uint64
	batch *unfold.Probes
	work  []probeWork
	a     []float64 // σ(n)/ν of the current iteration (0 where ν = 0)
	w     []float64 // n/ν² of the current iteration
	c     []float64 // σ(b) n/ν² (nil when the background variance is not propagated)
	red   parallel.Reducer
}

type probeWork struct {
	y, spare, gt []float64
	orig         []float64 // scratch of the smoothing
	update       func(j int, g float64) float64
	dmu          []float64
	it           *iterator
}

// newProbes prepares the recursion of the probes of batch, whose
// tangents dμ_s it fills.
func newProbes(m *model, batch *unfold.Probes) *probes {
	pr := &probes{m: m, count: batch.Len(), sdN: batch.DataSD(), sdB: batch.BackgroundSD(), batch: batch}
	for s := 0; s < pr.count; s++ {
		sn, sb := batch.Signs(s)
		pr.signN = append(pr.signN, sn)
		if sb != nil {
			pr.signB = append(pr.signB, sb)
		}
		pr.dmu = append(pr.dmu, batch.Tangent(s))
		pr.tfold = append(pr.tfold, make([]float64, m.nr))
	}
	pr.a = make([]float64, m.nr)
	pr.w = make([]float64, m.nr)
	if pr.sdB != nil {
		pr.c = make([]float64, m.nr)
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

func (pr *probes) init(ctx context.Context, it *iterator) error {
	m := pr.m
	parallel.For(pr.count, runtime.GOMAXPROCS(0), func(s int) {
		c := pr.batch.Net(s) / m.sumEP
		for j, p := range m.prior {
			pr.dmu[s][j] = c * p
		}
		for i, v := range it.rp {
			pr.tfold[s][i] = c * v
		}
	})
	return ctx.Err()
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
	return ctx.Err()
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
