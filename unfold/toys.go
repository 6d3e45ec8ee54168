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
	rng := rand.New(rand.NewPCG(seed, toyStream+uint64(t)))
	for i, x := range m.n {
		if x <= 0 {
			n[i] = 0
			continue
		}
		if !m.weighted {
			n[i] = means[i].rand(rng, x)
			continue
		}
		v := m.varN[i]
		if v <= 0 {
			n[i] = x
			continue
		}
		neff := x * x / v
		n[i] = means[i].rand(rng, neff) * v / x
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
// draw fills the pseudo-data of toy t (toyData or gammaData).
func toyVariances(ctx context.Context, m *Prepared, fit Fit, toys int, draw func(t int, n, b []float64), maxWorkers int, ds []*RowMatrix, dens []*Ensemble) ([]float64, [][]float64, error) {
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
