package unfold

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"

	"github.com/desmear/desmear/unfold/internal/parallel"
)

// toyMeans returns the constants of the Poisson draws of toyData for
// every reco bin (poissonMeanBytes each), formed once for all the toys
// of an ensemble; bins that toyData does not draw keep the zero value.
func toyMeans(m *Prepared) []poissonMean {
	c := make([]poissonMean, len(m.n))
	for i, x := range m.n {
		if x <= 0 {
			continue
		}
		if !m.weighted {
			c[i] = newPoissonMean(x)
			continue
		}
		if v := m.varN[i]; v > 0 {
			c[i] = newPoissonMean(x * x / v) // n_eff, as toyData forms it
		}
	}
	return c
}

// toyData fills n with pseudo-data for toy t and, when the background
// variance is propagated, b with a fluctuated background; means holds
// the constants of the draws (toyMeans).
//
// Unweighted data (no DataVariance) are Poisson with mean n_i. Weighted
// data are a scaled Poisson: n_i·k/n_eff with k ~ Poisson(n_eff),
// n_eff = n_i²/var_i, which has mean n_i and variance var_i (common
// practice). The counts are drawn as method.md §26 says. The background
// is Gaussian with the given variance, truncated at zero.
func toyData(m *Prepared, means []poissonMean, seed uint64, t int, n, b []float64) {
	src := rand.NewPCG(seed, toyStream+uint64(t))
	rng := rand.New(src) // the same stream, for the background
	for i, x := range m.n {
		if x <= 0 {
			n[i] = 0
			continue
		}
		if !m.weighted {
			n[i] = means[i].rand(src, x)
			continue
		}
		v := m.varN[i]
		if v <= 0 {
			n[i] = x
			continue
		}
		neff := x * x / v
		n[i] = means[i].rand(src, neff) * v / x
	}
	if b != nil {
		for i, x := range m.b {
			v := x + math.Sqrt(m.varB[i])*rng.NormFloat64()
			b[i] = math.Max(v, 0)
		}
	}
}

// gammaData fills n with sample t of the data expectation drawn from the
// Gamma posterior of each count (method.md §20) and, when the
// background variance is propagated, b as toyData does. An unweighted
// count n_i gives Gamma(n_i + a, 1), a weighted one Gamma(n_eff + a,
// var_i/n_i) with n_eff = n_i²/var_i, where a is 1 with the flat prior
// and 0 without; a shape of 0 gives 0.
func gammaData(m *Prepared, prior SamplingPrior, seed uint64, t int, n, b []float64) {
	rng := rand.New(rand.NewPCG(seed, gammaStream+uint64(t)))
	add := 0.0
	if prior == FlatSamplingPrior {
		add = 1
	}
	for i, x := range m.n {
		shape, scale := x, 1.0
		if m.weighted && x > 0 {
			if v := m.varN[i]; v > 0 {
				shape, scale = x*x/v, v/x
			} else {
				n[i] = x // known exactly
				continue
			}
		}
		n[i] = gammaRand(rng, shape+add) * scale
	}
	if b != nil {
		for i, x := range m.b {
			v := x + math.Sqrt(m.varB[i])*rng.NormFloat64()
			b[i] = math.Max(v, 0)
		}
	}
}

// toyVariances re-runs fit on toys pseudo-data sets and returns the
// sample variance of the estimate per truth bin and, for a fit keeping
// its steps whose runners report them (StepToyRunner), of the estimate
// of every step (nil otherwise). Toys run concurrently, one runner per
// goroutine; their results are accumulated in toy order (Welford's
// update), so the bits do not depend on the scheduling. At most
// maxWorkers toys run at once.
//
// draw fills the pseudo-data of toy t (toyData or gammaData). With
// blocks, a fit that is a ToyBlocker unfolds its toys in blocks of
// ToyBlock (toyBlockVariances), with the same bits.
func toyVariances(ctx context.Context, m *Prepared, fit Fit, toys int, draw func(t int, n, b []float64), maxWorkers int, blocks bool, ds []*RowMatrix, dens []*Ensemble) ([]float64, [][]float64, error) {
	if tb, ok := fit.(ToyBlocker); ok && blocks {
		if r := tb.NewToyBlockRunner(); r != nil {
			return toyBlockVariances(ctx, m, r, len(steps(fit)), toys, draw, ds, dens)
		}
	}
	workers := max(1, min(runtime.GOMAXPROCS(0), toys, maxWorkers))
	type slot struct {
		run   ToyRunner
		n, b  []float64
		est   []float64
		steps [][]float64 // the estimate of every step
		err   error
	}
	ns := len(steps(fit))
	slots := make([]slot, workers)
	for w := range slots {
		sl := &slots[w]
		if m.varB != nil {
			sl.b = make([]float64, m.nr)
		}
		sl.n = make([]float64, m.nr)
		sl.run = fit.NewToyRunner()
		if _, ok := sl.run.(StepToyRunner); !ok {
			ns = 0
		}
	}
	for w := range slots {
		if ns > 0 {
			slots[w].steps = make([][]float64, ns)
			for k := range slots[w].steps {
				slots[w].steps[k] = make([]float64, m.nt)
			}
		}
	}
	all := NewEnsemble(m.nt, false)
	var per []*Ensemble
	for range ns {
		per = append(per, NewEnsemble(m.nt, false))
	}
	for t0 := 0; t0 < toys; t0 += workers {
		if err := ctx.Err(); err != nil {
			return nil, nil, err
		}
		batch := min(workers, toys-t0)
		parallel.For(batch, batch, func(w int) {
			sl := &slots[w]
			draw(t0+w, sl.n, sl.b)
			if ns == 0 {
				sl.est, sl.err = sl.run.Run(ctx, sl.n, sl.b)
				return
			}
			sl.err = sl.run.(StepToyRunner).RunSteps(ctx, sl.n, sl.b, func(k int, est []float64) {
				if k >= 0 && k < ns {
					copy(sl.steps[k], est)
				}
			})
			sl.est = sl.steps[ns-1]
		})
		for w := 0; w < batch; w++ {
			sl := &slots[w]
			if sl.err != nil {
				return nil, nil, sl.err
			}
			all.Add(sl.est)
			addDerived(dens, ds, sl.est)
			for k, e := range per {
				e.Add(sl.steps[k])
			}
		}
	}
	var sv [][]float64
	for _, e := range per {
		sv = append(sv, e.Variances(nil))
	}
	return all.Variances(nil), sv, nil
}

// toyBlockBytes is the memory estimate of a block of toys run together
// (ToyBlockRunner): per toy of the block its pseudo-data (and its
// background when the background variance is propagated), the block's
// three interleaved reco vectors of the iteration (n/ν, the sweep's
// destination, the data) and one more for the scatter buffers of the
// response's sweep, and three truth vectors; and the ensemble of the
// estimates (four truth vectors).
func toyBlockBytes(m *Prepared) int64 {
	reco := int64(5)
	if m.varB != nil {
		reco++
	}
	return 8 * (ToyBlock*(reco*int64(m.nr)+3*int64(m.nt)) + 4*int64(m.nt))
}

// toyBlockVariances is toyVariances with the toys in blocks of ToyBlock
// run by r: the block's pseudo-data are drawn concurrently (each toy from
// its own stream), then r unfolds them together; the estimates are added
// in toy order, those of every step (when ns > 0) as r reports them,
// which is in toy order within each step.
func toyBlockVariances(ctx context.Context, m *Prepared, r ToyBlockRunner, ns, toys int, draw func(t int, n, b []float64), ds []*RowMatrix, dens []*Ensemble) ([]float64, [][]float64, error) {
	n := make([][]float64, min(ToyBlock, toys))
	var b [][]float64
	for s := range n {
		n[s] = make([]float64, m.nr)
		if m.varB != nil {
			b = append(b, make([]float64, m.nr))
		}
	}
	all := NewEnsemble(m.nt, false)
	var per []*Ensemble
	var each func(s, k int, est []float64)
	if ns > 0 {
		for range ns {
			per = append(per, NewEnsemble(m.nt, false))
		}
		each = func(_, k int, est []float64) {
			if k >= 0 && k < ns {
				per[k].Add(est)
			}
		}
	}
	for t0 := 0; t0 < toys; t0 += ToyBlock {
		if err := ctx.Err(); err != nil {
			return nil, nil, err
		}
		k := min(ToyBlock, toys-t0)
		bk := b
		if b != nil {
			bk = b[:k]
		}
		parallel.For(k, runtime.GOMAXPROCS(0), func(s int) {
			var bs []float64
			if b != nil {
				bs = b[s]
			}
			draw(t0+s, n[s], bs)
		})
		est, err := r.RunBlock(ctx, n[:k], bk, each)
		if err != nil {
			return nil, nil, err
		}
		for _, e := range est {
			all.Add(e)
			addDerived(dens, ds, e)
		}
	}
	var sv [][]float64
	for _, e := range per {
		sv = append(sv, e.Variances(nil))
	}
	return all.Variances(nil), sv, nil
}
