package unfold

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"

	"github.com/desmear/desmear/unfold/internal/parallel"
)

// MethodDirichlet is the Method of the simulation source computed by
// sampling the response.
const MethodDirichlet = "dirichlet-samples"

// MethodReplicas is the Method of the simulation source computed from
// Poisson bootstrap replicas of the simulated events (method.md §25).
const MethodReplicas = "bootstrap-replicas"

// DirichletParams returns the Dirichlet parameters of the response
// columns of p (method.md §20): alpha, parallel to the values of
// p.Migrations, and alpha0, the parameter of each column's inefficiency
// cell. For truth bin j with effective count N_j = G_j²/S_j (S_j =
// p.GeneratedSumW2[j]) the cell of reco bin k gets N_j·A_kj/G_j and the
// inefficiency cell N_j·(1 − Σ_k A_kj/G_j); with FlatSamplingPrior every
// cell with A_kj > 0 and the inefficiency cell get 1 more. Columns
// without migrations get 0 throughout.
//
// Errors: *InputError for the field GeneratedSumW2 when it is nil, of
// the wrong length, not finite and ≥ 0, or 0 for a truth bin with
// migrations.
func DirichletParams(p *Problem, prior SamplingPrior) (alpha, alpha0 []float64, err error) {
	if p.GeneratedSumW2 == nil {
		return nil, nil, inputErr("GeneratedSumW2", -1, -1, "the sums of squared weights of the generated counts are not given: the statistics of the simulation are unknown (a normalised response carries none), so the response cannot be sampled")
	}
	_, nt := p.Migrations.Dims()
	if err := checkVector("GeneratedSumW2", p.GeneratedSumW2, nt, false, false); err != nil {
		return nil, nil, err
	}
	add := 0.0
	if prior == FlatSamplingPrior {
		add = 1
	}
	colPtr, val := p.Migrations.ColPtr(), p.Migrations.Values()
	alpha = make([]float64, len(val))
	alpha0 = make([]float64, nt)
	for j := range nt {
		var sum float64
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			sum += val[k]
		}
		g, s2 := p.Generated[j], p.GeneratedSumW2[j]
		if sum <= 0 || g <= 0 {
			continue
		}
		if s2 <= 0 {
			return nil, nil, inputErr("GeneratedSumW2", -1, j, "is %v for a generated count %v: a truth bin with migrations needs the sum of its squared weights", s2, g)
		}
		neff := g * g / s2
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			if val[k] > 0 {
				alpha[k] = neff*val[k]/g + add
			}
		}
		alpha0[j] = neff*max(0, 1-sum/g) + add
	}
	return alpha, alpha0, nil
}

// SampleResponse draws the response values of sample s into dst
// (parallel to the values of the migrations, with generated counts gen):
// column j's cell probabilities, the inefficiency cell's included, from
// Dirichlet(alpha, alpha0_j) (normalised Gamma(alpha, 1) draws), times
// G_j. Cells with parameter 0 get 0. The numbers come from the PCG stream
// seeded with seed and stream responseStream+s only. colPtr are the
// migrations' column pointers. It panics if the lengths disagree.
func SampleResponse(dst []float64, colPtr []int, alpha, alpha0, gen []float64, seed uint64, s int) {
	if len(dst) != len(alpha) || len(alpha0) != len(gen) || len(colPtr) != len(gen)+1 {
		panic("unfold: SampleResponse lengths disagree")
	}
	rng := rand.New(rand.NewPCG(seed, responseStream+uint64(s)))
	for j, g := range gen {
		lo, hi := colPtr[j], colPtr[j+1]
		tot := gammaRand(rng, alpha0[j])
		for k := lo; k < hi; k++ {
			dst[k] = gammaRand(rng, alpha[k])
			tot += dst[k]
		}
		if tot <= 0 {
			clear(dst[lo:hi])
			continue
		}
		f := g / tot
		for k := lo; k < hi; k++ {
			dst[k] *= f
		}
	}
}

// gammaRand draws from Gamma(a, 1) (0 for a ≤ 0) with the method of
// G. Marsaglia and W. W. Tsang (ACM TOMS 26 (2000) 363), using
// Gamma(a) = Gamma(a+1)·U^(1/a) for a < 1 (their §6). It allocates
// nothing.
func gammaRand(rng *rand.Rand, a float64) float64 {
	if !(a > 0) {
		return 0
	}
	boost := 1.0
	if a < 1 {
		boost = math.Pow(1-rng.Float64(), 1/a) // 1−U in (0, 1]
		a++
	}
	d := a - 1.0/3
	c := 1 / math.Sqrt(9*d)
	for {
		x := rng.NormFloat64()
		v := 1 + c*x
		if v <= 0 {
			continue
		}
		v = v * v * v
		u := rng.Float64()
		if u < 1-0.0331*x*x*x*x || math.Log(u) < 0.5*x*x+d*(1-v+math.Log(v)) {
			return d * v * boost
		}
	}
}

// responseSource computes the simulation source by unfolding, with
// method m and the nominal data, rs.ResponseSamples responses sampled by
// SampleResponse, and taking the ensemble's variances (and covariance
// with Full). A method that is a Refitter reuses its work from sample to
// sample. Samples run concurrently, each worker on its own prepared
// problem, and are added to the ensemble in sample order, so the bits do
// not depend on the number of cores. det are the nominal determined
// bins; the source is 0 elsewhere.
func responseSource(ctx context.Context, p *Problem, rs *Settings, m Method, det []bool, ds []*RowMatrix) (*Source, error) {
	alpha, alpha0, err := DirichletParams(p, rs.SamplingPrior)
	if err != nil {
		return nil, err
	}
	samples := rs.ResponseSamples
	workers := min(runtime.GOMAXPROCS(0), samples)
	type slot struct {
		pr    *Prepared
		val   []float64
		est   []float64
		refit func(ctx context.Context, dst []float64) error
		err   error
	}
	slots := make([]slot, workers)
	for w := range slots {
		sl := &slots[w]
		sl.val = make([]float64, len(alpha))
		a, err := p.Migrations.WithValues(sl.val, nil)
		if err != nil {
			return nil, err
		}
		q := *p
		q.Migrations = a
		copy(sl.val, p.Migrations.Values())
		if sl.pr, err = Prepare(&q, rs.Background); err != nil {
			return nil, err
		}
		if rf, ok := m.(Refitter); ok {
			if sl.refit, err = rf.NewRefit(sl.pr); err != nil {
				return nil, err
			}
			sl.est = make([]float64, len(p.Generated))
		}
	}
	nt := len(p.Generated)
	full := rs.Covariance == Full
	ens := NewEnsemble(nt, full)
	dens := derivedEnsembles(ds)
	colPtr := p.Migrations.ColPtr()
	for s0 := 0; s0 < samples; s0 += workers {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		batch := min(workers, samples-s0)
		parallel.For(batch, batch, func(w int) {
			sl := &slots[w]
			SampleResponse(sl.val, colPtr, alpha, alpha0, p.Generated, rs.Seed, s0+w)
			if sl.err = sl.pr.SetResponse(sl.pr.a, p.Generated); sl.err != nil {
				return
			}
			if sl.refit != nil {
				sl.err = sl.refit(ctx, sl.est)
				return
			}
			var fit Fit
			if fit, sl.err = m.Fit(ctx, sl.pr); sl.err == nil {
				sl.est = fit.Estimate()
			}
		})
		for w := range batch {
			sl := &slots[w]
			if sl.err != nil {
				return nil, fmt.Errorf("response sample %d: %w", s0+w, sl.err)
			}
			ens.Add(sl.est)
			addDerived(dens, ds, sl.est)
		}
	}
	src := EnsembleSource(SourceSimulation, MethodDirichlet, ens, det)
	src.Derived = ensembleDerived(dens)
	return src, nil
}

// EnsembleSource returns the source name, obtained with method, of the
// ensemble of estimates ens: its variances, and its covariance when ens
// is full, 0 outside the determined bins det; Precision is
// sqrt(2/(N−1)), the relative standard deviation of a variance
// estimated from N Gaussian samples (common practice).
func EnsembleSource(name, method string, ens *Ensemble, det []bool) *Source {
	nt := ens.Len()
	src := &Source{Name: name, Method: method, Variance: ens.Variances(nil), Samples: int(ens.N)}
	if ens.N > 1 {
		src.Precision = math.Sqrt(2 / float64(ens.N-1))
	}
	if ens.Full {
		src.Covariance = ens.Covariance(nil)
		for j := range nt {
			for k := j; k < nt; k++ {
				if !det[j] || !det[k] {
					src.Covariance.SetSym(j, k, 0)
				}
			}
		}
	}
	for j, d := range det {
		if !d || src.Variance[j] < 0 {
			src.Variance[j] = 0
		}
	}
	return src
}

// UnfoldEach unfolds the problems k0 ≤ k < k1 with method m, the
// background mode of s (nil means the defaults) and no uncertainty, and
// adds their estimates to ens in the order of k: problem(k) gives
// problem k (for example the nominal problem with a varied response).
// Problems are prepared and unfolded concurrently, problem being called
// from several goroutines for distinct k, and added in order, so the bits
// do not depend on the number of cores.
//
// Errors: those of s.Resolve; those of problem, Prepare and the method,
// prefixed with "k: "; ctx.Err().
func UnfoldEach(ctx context.Context, ens *Ensemble, s *Settings, m Method, k0, k1 int, problem func(k int) (*Problem, error)) error {
	return UnfoldEachFunc(ctx, func(_ int, est []float64) { ens.Add(est) }, s, m, k0, k1, problem)
}

// UnfoldEachFunc is UnfoldEach calling add(k, estimate) for each problem
// k in the order of k, from the calling goroutine, instead of adding to
// an ensemble; the estimate is valid during the call only.
func UnfoldEachFunc(ctx context.Context, add func(k int, est []float64), s *Settings, m Method, k0, k1 int, problem func(k int) (*Problem, error)) error {
	rs, err := s.Resolve()
	if err != nil {
		return err
	}
	workers := max(1, min(runtime.GOMAXPROCS(0), k1-k0))
	est := make([][]float64, workers)
	errs := make([]error, workers)
	for b0 := k0; b0 < k1; b0 += workers {
		if err := ctx.Err(); err != nil {
			return err
		}
		batch := min(workers, k1-b0)
		parallel.For(batch, batch, func(w int) {
			est[w], errs[w] = nil, nil
			q, err := problem(b0 + w)
			if err != nil {
				errs[w] = err
				return
			}
			pr, err := Prepare(q, rs.Background)
			if err != nil {
				errs[w] = err
				return
			}
			fit, err := m.Fit(ctx, pr)
			if err != nil {
				errs[w] = err
				return
			}
			est[w] = fit.Estimate()
		})
		for w := range batch {
			if errs[w] != nil {
				return fmt.Errorf("%d: %w", b0+w, errs[w])
			}
			add(b0+w, est[w])
		}
	}
	return nil
}
