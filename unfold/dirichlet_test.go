package unfold_test

import (
	"context"
	"errors"
	"math"
	"runtime"
	"slices"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/inversion"
	"gonum.org/v1/gonum/mat"
)

// smeared returns a problem of nt truth and nr reco bins with Gaussian
// smearing of width 0.8 truth bins, efficiency 0.7 to 0.9, gen simulated
// events per truth bin (unweighted: Σw² = Σw) and expected data R·μ for
// the true spectrum μ_j = scale·(2 + sin j).
func smeared(t *testing.T, nt, nr int, gen, scale float64) (*unfold.Problem, []float64) {
	t.Helper()
	var colPtr, rowIdx []int
	var val []float64
	g := make([]float64, nt)
	truth := make([]float64, nt)
	colPtr = append(colPtr, 0)
	for j := range nt {
		g[j] = gen
		truth[j] = scale * (2 + math.Sin(float64(j)))
		eff := 0.7 + 0.2*float64(j%3)/2
		c := (float64(j) + 0.5) * float64(nr) / float64(nt)
		w := 0.8 * float64(nr) / float64(nt)
		var col []float64
		var rows []int
		var tot float64
		for i := range nr {
			x := (float64(i) + 0.5 - c) / w
			if math.Abs(x) > 3 {
				continue
			}
			rows = append(rows, i)
			col = append(col, math.Exp(-x*x/2))
			tot += math.Exp(-x * x / 2)
		}
		for k, i := range rows {
			rowIdx = append(rowIdx, i)
			val = append(val, math.Round(gen*eff*col[k]/tot)) // counts of the simulation
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := make([]float64, nr)
	for j := range nt {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			n[rowIdx[k]] += val[k] / g[j] * truth[j]
		}
	}
	return &unfold.Problem{Migrations: a, Generated: g, GeneratedSumW2: slices.Clone(g), Data: n}, truth
}

// denseDAgostini is an independent dense implementation of the iteration
// (G. D'Agostini, Nucl. Instrum. Meth. A 362 (1995) 487, eq. 4, with the
// efficiency eq. 6): μ(0) = p Σn/Σ_j eps_j p_j, μ_j ← (μ_j/eps_j) Σ_i
// R_ij n_i/ν_i, ν = R μ, for a dense R (reco × truth) and prior p.
func denseDAgostini(r *mat.Dense, n, p []float64, iters int) []float64 {
	nr, nt := r.Dims()
	eps := make([]float64, nt)
	var sumEP, sumN float64
	for j := range nt {
		for i := range nr {
			eps[j] += r.At(i, j)
		}
		sumEP += eps[j] * p[j]
	}
	for _, x := range n {
		sumN += x
	}
	mu := make([]float64, nt)
	for j := range mu {
		mu[j] = p[j] * sumN / sumEP
	}
	nu := make([]float64, nr)
	for range iters {
		for i := range nr {
			nu[i] = 0
			for j := range nt {
				nu[i] += r.At(i, j) * mu[j]
			}
		}
		next := make([]float64, nt)
		for j := range nt {
			var s float64
			for i := range nr {
				if nu[i] > 0 {
					s += r.At(i, j) * n[i] / nu[i]
				}
			}
			next[j] = mu[j] / eps[j] * s
		}
		mu = next
	}
	return mu
}

// multinomialCovariance is the linear propagation of the multinomial
// covariance of each response column, Cov(R_kj, R_lj) = R_kj(δ_kl −
// R_lj)/N_j (method.md §20 Sampling the response and the data), through
// the Jacobian of estimate(R) with respect to the stored entries of R,
// computed by central finite differences.
func multinomialCovariance(p *unfold.Problem, estimate func(r *mat.Dense) []float64) *mat.SymDense {
	nr, nt := p.Migrations.Dims()
	colPtr, rowIdx, val := p.Migrations.ColPtr(), p.Migrations.RowIdx(), p.Migrations.Values()
	r := mat.NewDense(nr, nt, nil)
	for j := range nt {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			r.Set(rowIdx[k], j, val[k]/p.Generated[j])
		}
	}
	v := mat.NewSymDense(nt, nil)
	for j := range nt {
		lo, hi := colPtr[j], colPtr[j+1]
		jac := make([][]float64, hi-lo) // d estimate / d R_kj
		for k := lo; k < hi; k++ {
			i := rowIdx[k]
			x := r.At(i, j)
			h := 1e-6 * x
			r.Set(i, j, x+h)
			up := estimate(r)
			r.Set(i, j, x-h)
			down := estimate(r)
			r.Set(i, j, x)
			d := make([]float64, nt)
			for q := range d {
				d[q] = (up[q] - down[q]) / (2 * h)
			}
			jac[k-lo] = d
		}
		nj := p.Generated[j] * p.Generated[j] / p.GeneratedSumW2[j]
		for a := lo; a < hi; a++ {
			for b := lo; b < hi; b++ {
				ra, rb := r.At(rowIdx[a], j), r.At(rowIdx[b], j)
				c := -ra * rb / nj
				if a == b {
					c += ra / nj
				}
				for q := range nt {
					for s := q; s < nt; s++ {
						v.SetSym(q, s, v.At(q, s)+jac[a-lo][q]*c*jac[b-lo][s])
					}
				}
			}
		}
	}
	return v
}

func TestDirichletMoments(t *testing.T) {
	// One column of three reco cells and its inefficiency cell. The
	// Dirichlet moments (N. L. Johnson, S. Kotz and N. Balakrishnan,
	// Continuous Multivariate Distributions vol. 1, Wiley 2000, ch. 49;
	// method.md §20): E p_k = α_k/α_0, Cov(p_k, p_l) = (α_k δ_kl α_0 −
	// α_k α_l)/(α_0²(α_0 + 1)), α_0 = Σ α including the inefficiency cell.
	alpha := []float64{3, 0.5, 12}
	alpha0 := []float64{4.5}
	gen := []float64{10}
	colPtr := []int{0, 3}
	const S = 40000
	ens := unfold.NewEnsemble(3, true)
	x := make([]float64, 3)
	for s := range S {
		unfold.SampleResponse(x, colPtr, alpha, alpha0, gen, 7, s)
		for k := range x {
			x[k] /= gen[0]
		}
		ens.Add(x)
	}
	a0 := 3 + 0.5 + 12 + 4.5
	cov := ens.Covariance(nil)
	for k := range 3 {
		if m, want := ens.Mean[k], alpha[k]/a0; math.Abs(m-want) > 4*math.Sqrt(cov.At(k, k)/S) {
			t.Errorf("mean of cell %d = %v, want %v", k, m, want)
		}
		for l := range 3 {
			want := -alpha[k] * alpha[l] / (a0 * a0 * (a0 + 1))
			if k == l {
				want += alpha[k] / (a0 * (a0 + 1))
			}
			// The sample covariance's standard error is about
			// sqrt(Var_k Var_l / S) (common practice).
			tol := 5 * math.Sqrt(cov.At(k, k)*cov.At(l, l)/S)
			if got := cov.At(k, l); math.Abs(got-want) > tol {
				t.Errorf("Cov(%d,%d) = %v, want %v ± %v", k, l, got, want, tol)
			}
		}
	}
}

func TestDirichletParams(t *testing.T) {
	p, _ := smeared(t, 4, 6, 100, 50)
	p.GeneratedSumW2 = []float64{25, 100, 400, 100} // N_eff = 400, 100, 25, 100
	for _, prior := range unfold.SamplingPriors() {
		alpha, alpha0, err := unfold.DirichletParams(p, prior)
		if err != nil {
			t.Fatal(err)
		}
		add := 0.0
		if prior == unfold.FlatSamplingPrior {
			add = 1 // D'Agostini, arXiv:1010.0632 (2010), the flat prior
		}
		colPtr, val := p.Migrations.ColPtr(), p.Migrations.Values()
		for j := range 4 {
			neff := p.Generated[j] * p.Generated[j] / p.GeneratedSumW2[j] // method.md §20
			sum := 0.0
			for k := colPtr[j]; k < colPtr[j+1]; k++ {
				want := 0.0
				if val[k] > 0 {
					want = neff*val[k]/p.Generated[j] + add
				}
				if math.Abs(alpha[k]-want) > 1e-12*want {
					t.Errorf("%v: alpha of entry %d = %v, want %v", prior, k, alpha[k], want)
				}
				sum += val[k]
			}
			if want := neff*(1-sum/p.Generated[j]) + add; math.Abs(alpha0[j]-want) > 1e-9*want {
				t.Errorf("%v: inefficiency alpha of column %d = %v, want %v", prior, j, alpha0[j], want)
			}
		}
	}
	p.GeneratedSumW2 = nil
	var ie *unfold.InputError
	if _, _, err := unfold.DirichletParams(p, unfold.NoSamplingPrior); !errors.As(err, &ie) || ie.Field != "GeneratedSumW2" {
		t.Errorf("no sums of squared weights: got %v, want an InputError on GeneratedSumW2", err)
	}
}

// sampledSimulation unfolds p with the iterative method (iters
// iterations) and S response samples, and returns the result.
func sampled(t *testing.T, p *unfold.Problem, m unfold.Method, cov unfold.CovarianceMode, samples int, seed uint64) *unfold.Result {
	t.Helper()
	res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: cov, ResponseSamples: samples, Seed: seed}, m)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

func TestResponseSamplesAgreeWithMultinomialPropagation(t *testing.T) {
	p, _ := smeared(t, 12, 16, 3000, 2000)
	const iters, S = 4, 3000
	res := sampled(t, p, &bayes.Settings{Iterations: iters}, unfold.Full, S, 11)
	// The dense implementation reproduces the method's estimate
	// (D'Agostini 1995, eq. 4): the Jacobian below is the method's.
	est := func(r *mat.Dense) []float64 { return denseDAgostini(r, p.Data, p.Generated, iters) }
	nr, nt := p.Migrations.Dims()
	r0, err := p.Migrations.ToDense()
	if err != nil {
		t.Fatal(err)
	}
	for j := range nt {
		for i := range nr {
			r0.Set(i, j, r0.At(i, j)/p.Generated[j])
		}
	}
	for j, x := range est(r0) {
		if math.Abs(x-res.Estimate[j]) > 1e-9*x {
			t.Fatalf("dense iteration %v differs from the method's %v in bin %d", x, res.Estimate[j], j)
		}
	}
	want := multinomialCovariance(p, est)
	src := res.Source(unfold.SourceSimulation)
	if src == nil || src.Method != unfold.MethodDirichlet || src.Samples != S || src.Covariance == nil {
		t.Fatalf("simulation source %+v", src)
	}
	// Toy precision of a variance: sqrt(2/(S−1)) (common practice); of a
	// correlation about (1 − ρ²)/sqrt(S).
	tolV := 4 * math.Sqrt(2/float64(S-1))
	for j := range nt {
		if got, w := src.Variance[j], want.At(j, j); math.Abs(got/w-1) > tolV {
			t.Errorf("bin %d: Dirichlet variance %v, multinomial propagation %v (ratio %v)", j, got, w, got/w)
		}
		for k := j + 1; k < nt; k++ {
			rg := src.Covariance.At(j, k) / math.Sqrt(src.Covariance.At(j, j)*src.Covariance.At(k, k))
			rw := want.At(j, k) / math.Sqrt(want.At(j, j)*want.At(k, k))
			if math.Abs(rg-rw) > 4*(1-rw*rw)/math.Sqrt(S)+0.01 {
				t.Errorf("bins %d,%d: Dirichlet correlation %v, multinomial propagation %v", j, k, rg, rw)
			}
		}
	}
	// The total is the data's covariance plus the simulation's
	// (method.md §18).
	d := res.Source(unfold.SourceData)
	for j := range nt {
		if got, w := res.Covariance.At(j, j), d.Covariance.At(j, j)+src.Covariance.At(j, j); math.Abs(got-w) > 1e-12*w {
			t.Errorf("bin %d: total variance %v, want %v", j, got, w)
		}
	}
}

func TestResponseSamplesScaleAsInverseEffectiveCount(t *testing.T) {
	p, _ := smeared(t, 8, 10, 2000, 1000)
	const S = 1500
	m := &bayes.Settings{Iterations: 3}
	var base float64
	for _, k := range []float64{1, 10, 100} {
		// Σw² = G/k: N_eff = k G (method.md §20).
		for j, g := range p.Generated {
			p.GeneratedSumW2[j] = g / k
		}
		res := sampled(t, p, m, unfold.Diagonal, S, 3)
		var v float64
		for _, x := range res.Source(unfold.SourceSimulation).Variance {
			v += x
		}
		if k == 1 {
			base = v
			continue
		}
		// The linear propagation scales exactly as 1/N_eff (method.md
		// §20); the summed sample variances have at most the precision
		// of one, sqrt(2/(S−1)), for both samples.
		if got := v * k / base; math.Abs(got-1) > 6*math.Sqrt(2/float64(S-1)) {
			t.Errorf("N_eff × %v: simulation variance × %v / nominal = %v, want 1", k, k, got)
		}
	}
}

func TestSimulationVarianceWithDataStatistics(t *testing.T) {
	// Unregularised inversion of a square response; with N_j = μ_j the
	// simulation covariance is V_data − diag(μ) (method.md §20, the ratio
	// for simulation statistics equal to the data's).
	p, _ := smeared(t, 12, 12, 1e5, 4000)
	nom, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Full}, &inversion.Settings{})
	if err != nil {
		t.Fatal(err)
	}
	for j, g := range p.Generated {
		p.GeneratedSumW2[j] = g * g / nom.Estimate[j] // N_eff,j = μ_j
	}
	const S = 3000
	res := sampled(t, p, &inversion.Settings{}, unfold.Full, S, 5)
	vd, vs := res.Source(unfold.SourceData), res.Source(unfold.SourceSimulation)
	tol := 4 * math.Sqrt(2/float64(S-1))
	for j := range 12 {
		want := vd.Variance[j] - nom.Estimate[j]
		if got := vs.Variance[j]; math.Abs(got/want-1) > tol {
			t.Errorf("bin %d: simulation variance %v, want V_data − μ = %v − %v = %v", j, got, vd.Variance[j], nom.Estimate[j], want)
		}
		t.Logf("bin %d: V_sim/V_data = %.3f (expected %.3f)", j, vs.Variance[j]/vd.Variance[j], 1-nom.Estimate[j]/vd.Variance[j])
	}
}

func TestGammaSamplesOfTheData(t *testing.T) {
	// Gamma(n, 1) has mean n and variance n, the Poisson variance of the
	// count (common practice), so without a prior the Gamma samples
	// reproduce the linearised variance of a linear method; the flat
	// prior's Gamma(n + 1, 1) has variance n + 1.
	p, _ := smeared(t, 10, 10, 1e5, 3000)
	ctx := context.Background()
	lin, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}, &inversion.Settings{})
	if err != nil {
		t.Fatal(err)
	}
	const T = 3000
	for _, prior := range unfold.SamplingPriors() {
		res, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalGamma, Toys: T, SamplingPrior: prior}, &inversion.Settings{})
		if err != nil {
			t.Fatal(err)
		}
		if res.UncertaintyMethod != "gamma-samples" || len(res.Streams) != 1 || res.Streams[0].Unit != "gamma-sample" {
			t.Fatalf("method %q, streams %v", res.UncertaintyMethod, res.Streams)
		}
		for j, u := range res.Uncertainty {
			w := lin.Uncertainty[j] * lin.Uncertainty[j]
			if got := u * u; math.Abs(got/w-1) > 4*math.Sqrt(2/float64(T-1)) {
				t.Errorf("%v, bin %d: Gamma-sample variance %v, linearised %v", prior, j, got, w)
			}
		}
	}
}

func TestResponseSamplesSameBitsForAnyCores(t *testing.T) {
	// Determinism rule: one PCG stream per sample (method.md §20).
	p, _ := smeared(t, 9, 12, 500, 300)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var ref *unfold.Result
	for _, procs := range []int{1, 2, 4} {
		runtime.GOMAXPROCS(procs)
		res := sampled(t, p, &bayes.Settings{Iterations: 4}, unfold.Full, 37, 9)
		if ref == nil {
			ref = res
			continue
		}
		s, r := res.Source(unfold.SourceSimulation), ref.Source(unfold.SourceSimulation)
		if !slices.Equal(s.Variance, r.Variance) || !mat.Equal(s.Covariance, r.Covariance) {
			t.Errorf("GOMAXPROCS %d: the simulation source differs from GOMAXPROCS 1", procs)
		}
	}
	other := sampled(t, p, &bayes.Settings{Iterations: 4}, unfold.Full, 37, 10)
	if slices.Equal(other.Source(unfold.SourceSimulation).Variance, ref.Source(unfold.SourceSimulation).Variance) {
		t.Error("another seed gives the same samples")
	}
	if want := []unfold.Stream{{Unit: "response-sample", Offset: 4 << 32}}; !slices.Equal(ref.Streams, want) || ref.Seed != 9 {
		t.Errorf("streams %v seed %d, want %v seed 9", ref.Streams, ref.Seed, want)
	}
}

func TestResponseSampleSettings(t *testing.T) {
	for _, c := range []struct {
		s     unfold.Settings
		field string
	}{
		{unfold.Settings{Covariance: unfold.Diagonal, ResponseSamples: 1}, "ResponseSamples"},
		{unfold.Settings{Covariance: unfold.Diagonal, ResponseSamples: -3}, "ResponseSamples"},
		{unfold.Settings{ResponseSamples: 10}, "ResponseSamples"},
		{unfold.Settings{Covariance: unfold.Diagonal, SamplingPrior: 7}, "SamplingPrior"},
	} {
		var se *unfold.SettingsError
		if _, err := c.s.Resolve(); !errors.As(err, &se) || se.Field != c.field {
			t.Errorf("%+v: got %v, want a SettingsError on %s", c.s, err, c.field)
		}
	}
	var sp unfold.SamplingPrior
	if err := sp.UnmarshalText([]byte("uniform")); err == nil {
		t.Error("an unknown sampling prior is accepted")
	}
	p, _ := smeared(t, 4, 6, 100, 50)
	p.GeneratedSumW2 = nil
	var ie *unfold.InputError
	_, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Diagonal, ResponseSamples: 5}, &bayes.Settings{})
	if !errors.As(err, &ie) || ie.Field != "GeneratedSumW2" {
		t.Errorf("response samples without Σw²: got %v", err)
	}
}
