package bayes

import (
	"context"
	"github.com/desmear/desmear/unfold"
	"math"
	"testing"

	"github.com/desmear/desmear/sparse"
	"gonum.org/v1/gonum/mat"
)

// denseProblem builds a Problem from a dense response R (rows reco,
// columns truth) with G_j = 1, so that A = R.
func denseProblem(t testing.TB, r [][]float64, n []float64) *unfold.Problem {
	t.Helper()
	nr, nt := len(r), len(r[0])
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	for j := 0; j < nt; j++ {
		for i := 0; i < nr; i++ {
			if r[i][j] != 0 {
				rowIdx = append(rowIdx, i)
				val = append(val, r[i][j])
			}
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	g := make([]float64, nt)
	for j := range g {
		g[j] = 1
	}
	return &unfold.Problem{Migrations: a, Generated: g, Data: n}
}

func unfoldOrFail(t testing.TB, p *unfold.Problem, s *opts) *unfold.Result {
	t.Helper()
	res, err := unfoldWith(context.Background(), p, s)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

func near(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}

// Oracle A of method.md §10 (reference values): exact rationals of
// the D'Agostini / EM update for R = [[0.8,0.1],[0.2,0.9]], n = (250,150),
// flat prior. Derived by hand (exact fractions), so this is a closed-form
// check.
func TestOracleAExactRationals(t *testing.T) {
	p := denseProblem(t, [][]float64{{0.8, 0.1}, {0.2, 0.9}}, []float64{250, 150})
	want := [][2]float64{
		{24700.0 / 99, 14900.0 / 99},
		{1702324.0 / 6239, 793276.0 / 6239},
		{284.67344551, 115.32655449},
	}
	for k, w := range want {
		res := unfoldOrFail(t, p, &opts{Iterations: k + 1})
		tol := 1e-14
		if k == 2 {
			tol = 1e-10 // quoted to 8 decimals
		}
		for j := range w {
			if !near(res.Estimate[j], w[j], tol) {
				t.Errorf("iteration %d bin %d: got %.12g, want %.12g", k+1, j, res.Estimate[j], w[j])
			}
		}
	}
}

// Oracle A (continued): Σ_j eps_j μ_j = Σ n = 400 after every iteration
// (exact conservation of the EM update; method.md §7 item 1), and
// the limit R⁻¹ n = (300, 100) (Vardi, Shepp, Kaufman, JASA 80 (1985) 8:
// EM converges to the maximum-likelihood estimate).
func TestOracleAConservationAndLimit(t *testing.T) {
	p := denseProblem(t, [][]float64{{0.8, 0.1}, {0.2, 0.9}}, []float64{250, 150})
	for k := 1; k <= 6; k++ {
		res := unfoldOrFail(t, p, &opts{Iterations: k})
		if s := res.Estimate[0] + res.Estimate[1]; !near(s, 400, 1e-14) {
			t.Errorf("iteration %d: Σ eps μ = %.15g, want 400", k, s)
		}
	}
	res := unfoldOrFail(t, p, &opts{Iterations: 2000})
	if !near(res.Estimate[0], 300, 1e-9) || !near(res.Estimate[1], 100, 1e-9) {
		t.Errorf("2000 iterations: got %v, want (300, 100)", res.Estimate)
	}
}

// Oracle B of method.md §10: without background only the prior's
// shape matters (priors (1,3) and (10,30) give (192.16300940,
// 207.83699060)), and the Asimov fixed point: n = R(300,100), prior
// (300,100) returns (300,100) after one step (method.md §7 items 3 and 4).
func TestOracleBPriorShapeAndAsimov(t *testing.T) {
	r := [][]float64{{0.8, 0.1}, {0.2, 0.9}}
	for _, prior := range [][]float64{{1, 3}, {10, 30}} {
		p := denseProblem(t, r, []float64{250, 150})
		p.Prior = prior
		res := unfoldOrFail(t, p, &opts{Iterations: 1})
		if !near(res.Estimate[0], 192.16300940, 1e-10) || !near(res.Estimate[1], 207.83699060, 1e-10) {
			t.Errorf("prior %v: got %v, want (192.16300940, 207.83699060)", prior, res.Estimate)
		}
	}
	p := denseProblem(t, r, []float64{250, 150})
	p.Prior = []float64{300, 100}
	res := unfoldOrFail(t, p, &opts{Iterations: 1})
	if !near(res.Estimate[0], 300, 1e-14) || !near(res.Estimate[1], 100, 1e-14) {
		t.Errorf("Asimov: got %v, want (300, 100)", res.Estimate)
	}
}

// Oracle C of method.md §10 (closed form): a diagonal response
// gives n_j / eps_j after one iteration whatever the positive prior —
// the bin-by-bin answer (method.md §7 item 5).
func TestOracleCDiagonal(t *testing.T) {
	p := denseProblem(t, [][]float64{{0.5, 0, 0}, {0, 0.8, 0}, {0, 0, 0.25}}, []float64{50, 40, 10})
	for _, prior := range [][]float64{nil, {1, 2, 3}, {7, 0.1, 1e3}} {
		p.Prior = prior
		res := unfoldOrFail(t, p, &opts{Iterations: 1})
		want := []float64{100, 50, 40}
		for j := range want {
			if !near(res.Estimate[j], want[j], 1e-14) {
				t.Errorf("prior %v bin %d: got %.15g, want %g", prior, j, res.Estimate[j], want[j])
			}
		}
	}
}

var (
	oracleDR = [][]float64{{0.60, 0.10, 0.00}, {0.20, 0.60, 0.10}, {0.05, 0.15, 0.60}, {0.00, 0.05, 0.20}}
	oracleDN = []float64{667, 578, 325, 87}
)

// Oracle D of method.md §10: 3 truth × 4 reco with inefficiency,
// flat prior. The numbers come from an independent cross-check
// computation of the iteration (not from a publication; method.md §10):
// iteration 1 and 5, Σ eps μ = 1657 at every step, log-likelihood
// 8607.7217 (iteration 1) to 8624.3521 (iteration 5). The Asimov data
// (660, 590, 320, 90) converge to (1000, 600, 300) (method.md §7 item 9).
func TestOracleD(t *testing.T) {
	p := denseProblem(t, oracleDR, oracleDN)
	eps := []float64{0.85, 0.90, 0.90}
	var hist []Step
	for k, want := range map[int][]float64{1: {847.613212, 621.062831, 419.524691}, 5: {1006.166641, 581.767988, 309.074630}} {
		res := unfoldOrFail(t, p, &opts{Iterations: k})
		for j := range want {
			if math.Abs(res.Estimate[j]-want[j]) > 5e-7 { // quoted to 6 decimals
				t.Errorf("iteration %d bin %d: got %.9f, want %.6f", k, j, res.Estimate[j], want[j])
			}
		}
		if k == 5 {
			hist = details(res).History
		}
	}
	if math.Abs(hist[1].LogLikelihood-8607.7217) > 1e-4 || math.Abs(hist[5].LogLikelihood-8624.3521) > 1e-4 {
		t.Errorf("log-likelihood: iteration 1 %.4f (want 8607.7217), 5 %.4f (want 8624.3521)", hist[1].LogLikelihood, hist[5].LogLikelihood)
	}
	for k := 1; k <= 5; k++ {
		res := unfoldOrFail(t, p, &opts{Iterations: k})
		var s float64
		for j, x := range res.Estimate {
			s += eps[j] * x
		}
		if !near(s, 1657, 1e-13) {
			t.Errorf("iteration %d: Σ eps μ = %.15g, want 1657", k, s)
		}
	}
	asimov := denseProblem(t, oracleDR, []float64{660, 590, 320, 90})
	res := unfoldOrFail(t, asimov, &opts{Iterations: 20000})
	for j, want := range []float64{1000, 600, 300} {
		if !near(res.Estimate[j], want, 1e-8) {
			t.Errorf("Asimov bin %d: got %.10g, want %g", j, res.Estimate[j], want)
		}
	}
}

var (
	oracleER = [][]float64{{0.7, 0.2, 0}, {0.2, 0.6, 0.2}, {0, 0.15, 0.7}}
	oracleEN = []float64{820, 900, 640}
)

// Oracle E of method.md §10: 3×3 with inefficiency, flat prior,
// Poisson data. The Jacobian J(K) = dμ(K)/dn, the uncertainties
// sqrt(diag V) and the correlation of bins 0 and 1 for K = 1, 2, 4 come
// from an independent computation (method.md §10; not from a publication)
// (the linearised propagation of T. Adye, PHYSTAT 2011, CERN-2011-006,
// re-derived in method.md §8 and checked against finite differences). For K → ∞,
// μ → R⁻¹ n and J → R⁻¹ (checked against gonum's dense inverse).
func TestOracleE(t *testing.T) {
	cases := []struct {
		k    int
		mu   []float64
		jac  [][]float64
		sd   []float64
		corr float64
	}{
		{1, []float64{908.641975, 879.119367, 785.620915},
			[][]float64{{0.864198, 0.222222, 0}, {0.233918, 0.631579, 0.185759}, {0, 0.222222, 0.915033}},
			[]float64{25.629106, 20.638684, 24.089556}, 0.552187},
		{2, []float64{923.565227, 894.044441, 754.943419},
			[][]float64{{1.100047, 0.097848, -0.103964}, {0.100563, 0.858981, 0.060156}, {-0.095086, 0.106561, 1.151577}},
			[]float64{31.746167, 25.974453, 29.433933}, 0.196891},
		{4, []float64{923.073223, 916.034067, 732.224150}, nil,
			[]float64{37.527438, 36.582953, 33.943201}, -0.159025},
	}
	for _, c := range cases {
		p := denseProblem(t, oracleER, oracleEN)
		res := unfoldOrFail(t, p, &opts{Iterations: c.k, Covariance: unfold.Full})
		for j := range c.mu {
			if math.Abs(res.Estimate[j]-c.mu[j]) > 1e-6 {
				t.Errorf("K=%d μ_%d = %.6f, want %.6f", c.k, j, res.Estimate[j], c.mu[j])
			}
			if math.Abs(res.Uncertainty[j]-c.sd[j]) > 1e-6 {
				t.Errorf("K=%d σ_%d = %.6f, want %.6f", c.k, j, res.Uncertainty[j], c.sd[j])
			}
		}
		corr := res.Covariance.At(0, 1) / (res.Uncertainty[0] * res.Uncertainty[1])
		if math.Abs(corr-c.corr) > 1e-6 {
			t.Errorf("K=%d corr(0,1) = %.6f, want %.6f", c.k, corr, c.corr)
		}
		if c.jac != nil {
			jc, _ := jacobianOf(t, p, &opts{Iterations: c.k})
			for i := range c.jac {
				for r := range c.jac[i] {
					if got := jc.at(i, r); math.Abs(got-c.jac[i][r]) > 1e-6 {
						t.Errorf("K=%d J[%d][%d] = %.6f, want %.6f", c.k, i, r, got, c.jac[i][r])
					}
				}
			}
		}
	}

	// K → ∞.
	p := denseProblem(t, oracleER, oracleEN)
	res := unfoldOrFail(t, p, &opts{Iterations: 3000, Covariance: unfold.Full})
	var inv mat.Dense
	if err := inv.Inverse(mat.NewDense(3, 3, []float64{0.7, 0.2, 0, 0.2, 0.6, 0.2, 0, 0.15, 0.7})); err != nil {
		t.Fatal(err)
	}
	var lim mat.VecDense
	lim.MulVec(&inv, mat.NewVecDense(3, append([]float64(nil), oracleEN...)))
	jc, _ := jacobianOf(t, p, &opts{Iterations: 3000})
	for j := 0; j < 3; j++ {
		if !near(res.Estimate[j], lim.AtVec(j), 1e-9) {
			t.Errorf("K=∞ μ_%d = %.9f, want R⁻¹n = %.9f", j, res.Estimate[j], lim.AtVec(j))
		}
		for r := 0; r < 3; r++ {
			if math.Abs(jc.at(j, r)-inv.At(j, r)) > 1e-8 {
				t.Errorf("K=∞ J[%d][%d] = %.9f, want R⁻¹ = %.9f", j, r, jc.at(j, r), inv.At(j, r))
			}
		}
	}
	for j, want := range []float64{48.8751, 63.8493, 41.4394} {
		if math.Abs(res.Uncertainty[j]-want) > 1e-4 {
			t.Errorf("K=∞ σ_%d = %.4f, want %.4f", j, res.Uncertainty[j], want)
		}
	}
}

// Oracle J of method.md §10 (closed form, method.md §7 item 8): when R⁻¹n
// has a negative component, EM converges to the boundary maximum of the
// likelihood, (0, 200), not to R⁻¹n = (−14.29, 214.29); μ_1 decays
// geometrically with ratio 0.8·10/20 + 0.2·190/180 = 0.611111.
func TestOracleJBoundary(t *testing.T) {
	p := denseProblem(t, [][]float64{{0.8, 0.1}, {0.2, 0.9}}, []float64{10, 190})
	a := unfoldOrFail(t, p, &opts{Iterations: 200})
	b := unfoldOrFail(t, p, &opts{Iterations: 201})
	if a.Estimate[0] > 1e-30 || !near(a.Estimate[1], 200, 1e-12) {
		t.Errorf("200 iterations: got %v, want (0, 200)", a.Estimate)
	}
	ratio := b.Estimate[0] / a.Estimate[0]
	if want := 0.8*10/20 + 0.2*190/180.0; math.Abs(ratio-want) > 1e-9 {
		t.Errorf("decay ratio %.9f, want %.9f", ratio, want)
	}
}

// Oracle K of method.md §10 (independent cross-check
// computation): Oracle D's R and n with a background b = (20, 5, 30,
// 10) inside ν. Started from the unscaled flat prior (1, 1, 1), the first
// step gives Σ eps μ' = Σ n (ν−b)/ν = 121.28855674; with the tool's own
// scaled start the identity Σ eps μ' = Σ_i n_i (ν_i − b_i)/ν_i holds at
// every step (method.md §7 item 1) and the log-likelihood does not decrease (§7 item 2).
func TestOracleKBackground(t *testing.T) {
	p := denseProblem(t, oracleDR, oracleDN)
	p.Background = []float64{20, 5, 30, 10}
	eps := []float64{0.85, 0.90, 0.90}
	m, err := prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	it := newIterator(m, nil)
	it.start(m.n)
	for j := range it.mu {
		it.mu[j] = 1
	}
	m.p.Fold(it.fold, it.mu, make([]float64, 3))
	it.reco()
	it.emStep()
	var s float64
	for j, x := range it.next {
		s += eps[j] * x
	}
	if !near(s, 121.28855674, 1e-9) {
		t.Errorf("unscaled start: Σ eps μ' = %.8f, want 121.28855674", s)
	}

	res := unfoldOrFail(t, p, &opts{Iterations: 30})
	for k := 2; k <= 30; k++ {
		prev := unfoldOrFail(t, p, &opts{Iterations: k - 1})
		cur := unfoldOrFail(t, p, &opts{Iterations: k})
		var lhs, rhs float64
		for j, x := range cur.Estimate {
			lhs += eps[j] * x
		}
		for i, nu := range prev.Folded {
			rhs += oracleDN[i] * (nu - p.Background[i]) / nu
		}
		if !near(lhs, rhs, 1e-12) {
			t.Errorf("iteration %d: Σ eps μ = %.12g, Σ n (ν−b)/ν = %.12g", k, lhs, rhs)
		}
	}
	for k := 1; k < len(details(res).History); k++ {
		if details(res).History[k].LogLikelihood < details(res).History[k-1].LogLikelihood-1e-9 {
			t.Errorf("log-likelihood decreased at iteration %d: %.10f after %.10f", k, details(res).History[k].LogLikelihood, details(res).History[k-1].LogLikelihood)
		}
	}
}

// Oracle G of method.md §10 (closed form of matrix inversion):
// for the symmetric 2×2 response R = [[1−p, p], [p, 1−p]] and n = (1000,
// 1000), many iterations reach the inverse, whose covariance
// R⁻¹ diag(n) R⁻ᵀ has Var = [(1−p)² n_1 + p² n_2]/(1−2p)² and correlation
// −2p(1−p)/((1−p)² + p²): p = 0.1 gives 1281.25 and −0.219512, p = 0.3
// gives 3625 and −0.724138.
func TestOracleGInversionLimit(t *testing.T) {
	for _, c := range []struct{ p, v, rho float64 }{{0.1, 1281.25, -0.219512}, {0.3, 3625, -0.724138}} {
		pr := denseProblem(t, [][]float64{{1 - c.p, c.p}, {c.p, 1 - c.p}}, []float64{1000, 1000})
		pr.Prior = []float64{1, 2} // away from the solution, which is (1000, 1000)
		res := unfoldOrFail(t, pr, &opts{Iterations: 4000, Covariance: unfold.Full})
		for j := 0; j < 2; j++ {
			if !near(res.Estimate[j], 1000, 1e-9) {
				t.Errorf("p=%g μ_%d = %.10g, want 1000", c.p, j, res.Estimate[j])
			}
			if v := res.Covariance.At(j, j); !near(v, c.v, 1e-8) {
				t.Errorf("p=%g Var_%d = %.8g, want %g", c.p, j, v, c.v)
			}
		}
		if rho := res.Covariance.At(0, 1) / (res.Uncertainty[0] * res.Uncertainty[1]); math.Abs(rho-c.rho) > 1e-6 {
			t.Errorf("p=%g correlation %.6f, want %.6f", c.p, rho, c.rho)
		}
	}
}
