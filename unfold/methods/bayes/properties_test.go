package bayes

import (
	"context"
	"github.com/desmear/desmear/unfold"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// A square, invertible response with a positive solution: many
// iterations converge to the maximum-likelihood estimate R⁻¹(n − b),
// computed with gonum's dense solver (EM converges to the MLE: Vardi,
// Shepp, Kaufman, JASA 80 (1985) 8; at the MLE ν = n).
func TestSquareLimitIsDenseSolve(t *testing.T) {
	for _, bkg := range []bool{false, true} {
		p := randomProblem(t, 11, 12, 12, 3, bkg)
		// Asimov-like data from a positive truth, so that R⁻¹(n−b) > 0.
		r := denseR(p.Migrations, p.Generated)
		truth := make([]float64, 12)
		for j := range truth {
			truth[j] = 500 + 40*float64(j%5)
		}
		var f mat.VecDense
		f.MulVec(r, mat.NewVecDense(12, truth))
		for i := range p.Data {
			p.Data[i] = math.Round(f.AtVec(i)) + float64(i%3) // perturbed, positive solution
			if bkg {
				p.Data[i] += math.Round(p.Background[i])
			}
		}
		rhs := mat.NewVecDense(12, nil)
		for i := range p.Data {
			v := p.Data[i]
			if bkg {
				v -= p.Background[i]
			}
			rhs.SetVec(i, v)
		}
		var want mat.VecDense
		if err := want.SolveVec(r, rhs); err != nil {
			t.Fatal(err)
		}
		res := unfoldOrFail(t, p, &opts{Iterations: 20000})
		for j := range truth {
			if want.AtVec(j) <= 0 {
				t.Fatalf("test problem has a non-positive solution %v", want.AtVec(j))
			}
			if !near(res.Estimate[j], want.AtVec(j), 1e-7) {
				t.Errorf("bkg=%v bin %d: EM %.10g, dense solve %.10g", bkg, j, res.Estimate[j], want.AtVec(j))
			}
		}
	}
}

// The Poisson log-likelihood does not decrease at any iteration: the
// iteration is an EM algorithm (Dempster, Laird, Rubin, JRSS B 39 (1977)
// 1; Lucy, AJ 79 (1974) 745). With b = 0, Σ_j eps_j μ_j(k) = Σ_i n_i after
// every iteration (method.md §7 item 1, an exact property of the
// EM update).
func TestLikelihoodMonotoneAndConservation(t *testing.T) {
	for seed := uint64(1); seed <= 4; seed++ {
		for _, bkg := range []bool{false, true} {
			p := randomProblem(t, seed, 40, 90, 7, bkg)
			res := unfoldOrFail(t, p, &opts{Iterations: 60})
			for k := 1; k < len(details(res).History); k++ {
				h, prev := details(res).History[k], details(res).History[k-1]
				if h.LogLikelihood < prev.LogLikelihood-1e-9*math.Abs(prev.LogLikelihood) {
					t.Errorf("seed %d bkg=%v: log-likelihood fell at iteration %d: %.12g < %.12g", seed, bkg, k, h.LogLikelihood, prev.LogLikelihood)
				}
			}
			if bkg {
				continue
			}
			var sumN float64
			for _, x := range p.Data {
				sumN += x
			}
			for _, k := range []int{1, 2, 3, 7, 20} {
				r := unfoldOrFail(t, p, &opts{Iterations: k})
				var s float64
				for j, x := range r.Estimate {
					s += r.Efficiency[j] * x
				}
				if !near(s, sumN, 1e-12) {
					t.Errorf("seed %d iteration %d: Σ eps μ = %.15g, Σ n = %.15g", seed, k, s, sumN)
				}
			}
		}
	}
}

// Diagonal response: one iteration gives n_j/eps_j exactly (method.md
// §7 item 5, closed form), for random efficiencies and data.
func TestDiagonalOneIteration(t *testing.T) {
	p := randomProblem(t, 3, 50, 50, 1, false)
	res := unfoldOrFail(t, p, &opts{Iterations: 1})
	for j := range res.Estimate {
		want := p.Data[j] / res.Efficiency[j]
		if !near(res.Estimate[j], want, 1e-14) {
			t.Errorf("bin %d: got %.17g, want n/eps = %.17g", j, res.Estimate[j], want)
		}
	}
}

// denseEM is the same update written with gonum dense arithmetic, as an
// independent reference for the sparse kernel: ν = R μ + b,
// μ' = μ/eps ∘ Rᵀ(n/ν), from μ(0) = p Σ(n−b)/Σ eps p.
func denseEM(p *unfold.Problem, iterations int) []float64 {
	r := denseR(p.Migrations, p.Generated)
	nr, nt := r.Dims()
	eps := make([]float64, nt)
	for j := range eps {
		eps[j] = mat.Sum(r.ColView(j))
	}
	prior := p.Prior
	if prior == nil {
		prior = p.Generated
	}
	var sn, sep float64
	for i, x := range p.Data {
		sn += x
		if p.Background != nil {
			sn -= p.Background[i]
		}
	}
	for j := range eps {
		sep += eps[j] * prior[j]
	}
	mu := mat.NewVecDense(nt, nil)
	for j := range eps {
		mu.SetVec(j, prior[j]*sn/sep)
	}
	var nu, g mat.VecDense
	y := mat.NewVecDense(nr, nil)
	for k := 0; k < iterations; k++ {
		nu.MulVec(r, mu)
		for i := 0; i < nr; i++ {
			v := nu.AtVec(i)
			if p.Background != nil {
				v += p.Background[i]
			}
			if v > 0 {
				y.SetVec(i, p.Data[i]/v)
			} else {
				y.SetVec(i, 0)
			}
		}
		g.MulVec(r.T(), y)
		for j := 0; j < nt; j++ {
			mu.SetVec(j, mu.AtVec(j)*g.AtVec(j)/eps[j])
		}
	}
	return mu.RawVector().Data
}

// denseJacobian is the linearised recursion written with gonum dense
// products (J = dμ/dn only), an independent reference for the sparse
// operators of the dense-Jacobian update.
func denseJacobian(p *unfold.Problem, iterations int) *mat.Dense {
	r := denseR(p.Migrations, p.Generated)
	nr, nt := r.Dims()
	eps := make([]float64, nt)
	for j := range eps {
		eps[j] = mat.Sum(r.ColView(j))
	}
	prior := p.Generated
	var sn, sep float64
	for _, x := range p.Data {
		sn += x
	}
	for j := range eps {
		sep += eps[j] * prior[j]
	}
	mu := mat.NewVecDense(nt, nil)
	J := mat.NewDense(nt, nr, nil)
	for j := 0; j < nt; j++ {
		mu.SetVec(j, prior[j]*sn/sep)
		for q := 0; q < nr; q++ {
			J.Set(j, q, prior[j]/sep)
		}
	}
	for k := 0; k < iterations; k++ {
		var nu mat.VecDense
		nu.MulVec(r, mu)
		y := mat.NewVecDense(nr, nil)
		dinv := mat.NewDense(nr, nr, nil)
		dw := mat.NewDense(nr, nr, nil)
		for i := 0; i < nr; i++ {
			v := nu.AtVec(i)
			y.SetVec(i, p.Data[i]/v)
			dinv.Set(i, i, 1/v)
			dw.Set(i, i, p.Data[i]/(v*v))
		}
		var g mat.VecDense
		g.MulVec(r.T(), y)
		var src, a, aj mat.Dense
		src.Mul(r.T(), dinv)
		a.Product(r.T(), dw, r)
		aj.Mul(&a, J)
		src.Sub(&src, &aj)
		next := mat.NewDense(nt, nr, nil)
		for j := 0; j < nt; j++ {
			for q := 0; q < nr; q++ {
				next.Set(j, q, g.AtVec(j)/eps[j]*J.At(j, q)+mu.AtVec(j)/eps[j]*src.At(j, q))
			}
		}
		for j := 0; j < nt; j++ {
			mu.SetVec(j, mu.AtVec(j)*g.AtVec(j)/eps[j])
		}
		J = next
	}
	return J
}

// The sparse kernel agrees with a dense gonum implementation of the same
// update on random problems to 1e-12 (gonum as the reference library),
// and so do the dense Jacobian built from the sparse operators and the
// probe Jacobian-vector products.
func TestSparseAgainstDenseGonum(t *testing.T) {
	for seed := uint64(1); seed <= 3; seed++ {
		for _, bkg := range []bool{false, true} {
			p := randomProblem(t, seed, 37, 81, 9, bkg)
			for _, k := range []int{1, 5, 25} {
				res := unfoldOrFail(t, p, &opts{Iterations: k})
				if d := maxRelDiff(res.Estimate, denseEM(p, k)); d > 1e-12 {
					t.Errorf("seed %d bkg=%v K=%d: sparse vs dense max relative difference %g", seed, bkg, k, d)
				}
			}
		}
		p := randomProblem(t, seed, 37, 81, 9, false)
		jc, _ := jacobianOf(t, p, &opts{Iterations: 6})
		ref := denseJacobian(p, 6)
		scale := mat.Norm(ref, math.Inf(1))
		var d float64
		for j := 0; j < 37; j++ {
			for q := 0; q < 81; q++ {
				d = math.Max(d, math.Abs(jc.at(j, q)-ref.At(j, q)))
			}
		}
		if d > 1e-12*scale {
			t.Errorf("seed %d: dense Jacobian vs gonum reference: max difference %g (scale %g)", seed, d, scale)
		}

		// Probes: each propagated probe must equal J z for its own z.
		m, _ := prepare(p, unfold.InModel)
		rs, _ := (&opts{Iterations: 6}).resolve()
		pr := newProbes(m, unfold.NewProbes(m.p, 0, 3, 99), true)
		if _, err := newIterator(m, nil).run(context.Background(), m.n, rs, pr); err != nil {
			t.Fatal(err)
		}
		for s := 0; s < 3; s++ {
			for j := 0; j < 37; j++ {
				var want float64
				for q := 0; q < 81; q++ {
					want += ref.At(j, q) * unfold.Sign(pr.signN[s], q) * math.Sqrt(p.Data[q])
				}
				if math.Abs(pr.dmu[s][j]-want) > 1e-11*math.Max(1, math.Abs(want)) {
					t.Errorf("seed %d probe %d bin %d: JVP %.15g, J z %.15g", seed, s, j, pr.dmu[s][j], want)
				}
			}
		}
	}
}

// Σ_j eps_j M_jm = 1 for every reco bin m and every iteration, without
// background: a consequence of the exact conservation Σ eps μ = Σ n
// (method.md §8 Linearised uncertainty propagation, derived there).
func TestEfficiencyWeightedJacobianSumsToOne(t *testing.T) {
	p := randomProblem(t, 5, 30, 70, 8, false)
	for _, k := range []int{1, 3, 10} {
		jc, res := jacobianOf(t, p, &opts{Iterations: k})
		for q := 0; q < jc.cols; q++ {
			var s float64
			for j := 0; j < 30; j++ {
				s += res.Efficiency[j] * jc.at(j, q)
			}
			if math.Abs(s-1) > 1e-12 {
				t.Errorf("K=%d reco bin %d: Σ eps M = %.15g, want 1", k, q, s)
			}
		}
	}
}

// Stopping by the χ² between successive iterations: the iteration stops
// at the first k whose χ² is at most the threshold, and χ² is the
// documented Σ eps (Δμ)²/μ.
func TestStopChi2(t *testing.T) {
	p := denseProblem(t, oracleDR, oracleDN)
	res := unfoldOrFail(t, p, &opts{StopChi2: 1, MaxIterations: 50})
	// From Oracle D's history: χ² = 140.4, 19.8, 3.54, 0.713 → stops at 4.
	if d := details(res); d.Iterations != 4 || !d.Converged || d.StoppedBy != StoppedByChi2 {
		t.Errorf("stopped after %d iterations (converged %v, by %q), want 4 by %q", d.Iterations, d.Converged, d.StoppedBy, StoppedByChi2)
	}
	prev := unfoldOrFail(t, p, &opts{Iterations: 3})
	if d := details(prev); d.StoppedBy != StoppedByIterations || d.Converged {
		t.Errorf("fixed count: stopped by %q (converged %v), want %q", d.StoppedBy, d.Converged, StoppedByIterations)
	}
	var chi2 float64
	for j, x := range res.Estimate {
		d := x - prev.Estimate[j]
		chi2 += res.Efficiency[j] * d * d / x
	}
	if !near(details(res).History[4].Chi2, chi2, 1e-12) {
		t.Errorf("χ²(4) = %g, recomputed %g", details(res).History[4].Chi2, chi2)
	}
	capped := unfoldOrFail(t, p, &opts{StopChi2: 1e-12, MaxIterations: 7})
	if d := details(capped); d.Iterations != 7 || d.Converged || d.StoppedBy != StoppedByMaxIterations {
		t.Errorf("capped: %d iterations, converged %v, by %q; want 7, false, %q", d.Iterations, d.Converged, d.StoppedBy, StoppedByMaxIterations)
	}
}
