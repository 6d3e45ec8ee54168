package tikhonov

import (
	"context"
	"math"
	"runtime"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// The estimate is linear in the data, μ = K (n − b) with
// K = (Rᵀ W R + τ² Lᵀ L)⁻¹ Rᵀ W (method.md §13 Tikhonov regularisation),
// so the exact covariance is K diag(var n) Kᵀ + K diag(var b) Kᵀ. The
// reference K is built column by column with gonum's LU solve; the full
// and exact-diagonal modes agree to 1e-8, probes and toys within four
// times their stated precision (method.md §9 Probes and toys), with
// both solvers.
func TestUncertaintyIsExact(t *testing.T) {
	nt, nr := 12, 18
	a, gen := randomResponse(t, 3, nt, nr, 4, 5)
	truth := make([]float64, nt)
	for j := range truth {
		truth[j] = 800 + 200*math.Cos(float64(j)/2)
	}
	truth[5] = 0
	p := noisyProblem(a, gen, truth, 9)
	p.Background = make([]float64, nr)
	p.BackgroundVariance = make([]float64, nr)
	for i := range p.Background {
		p.Background[i], p.BackgroundVariance[i] = 10, 4
		p.Data[i] += 10
	}
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	l, _ := newPenalty(nil, nt, pr.Determined(), Curvature, false)
	tau := 0.05 * newSystem(pr, l, nil, 1e-12, 0).scale()
	// Reference: K e_i by the dense LU solve; var = Σ_i K_ji² (var n_i + var b_i).
	want := make([]float64, nt)
	for i := 0; i < nr; i++ {
		e := make([]float64, nr)
		e[i] = 1
		k := denseReference(t, pr, l, tau, e)
		for j, v := range k {
			want[j] += v * v * (pr.DataVariance()[i] + p.BackgroundVariance[i])
		}
	}
	for _, solver := range []Solver{DenseSolver, SparseSolver} {
		m := &Settings{Tau: tau, Solver: solver, Tolerance: 1e-14}
		for _, c := range []struct {
			name string
			s    unfold.Settings
			tol  float64
		}{
			{"full", unfold.Settings{Covariance: unfold.Full}, 1e-8},
			{"exact", unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}, 1e-8},
			{"probes", unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 2000, Seed: 2}, 4 * math.Sqrt(2.0/2000)},
			{"toys", unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 2000, Seed: 2}, 4 * math.Sqrt(2.0/1999)},
		} {
			res, err := unfold.Unfold(context.Background(), p, &c.s, m)
			if err != nil {
				t.Fatalf("%v %s: %v", solver, c.name, err)
			}
			for j := range want {
				got := res.Uncertainty[j] * res.Uncertainty[j]
				if math.Abs(got-want[j]) > c.tol*want[j] {
					t.Errorf("%v %s: variance[%d] = %v, want %v", solver, c.name, j, got, want[j])
				}
			}
			if c.s.Covariance == unfold.Full && math.Abs(res.Covariance.At(0, 0)-res.Uncertainty[0]*res.Uncertainty[0]) > 1e-12*res.Covariance.At(0, 0) {
				t.Errorf("%v full: covariance diagonal differs from the uncertainty", solver)
			}
		}
	}
}

// Same inputs give the same bits with 1 and 4 cores (the conjugate
// gradients sum serially; the probes run one per goroutine).
func TestDeterministic(t *testing.T) {
	s := readScheme(t, "scheme3d.yaml")
	nt := s.Len()
	a, gen := randomResponse(t, 4, nt, 2*nt, 6)
	truth := linearTruth(s, false)
	p := noisyProblem(a, gen, truth, 1)
	run := func(procs int) *unfold.Result {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 16, Seed: 1}, &Settings{Truth: s, Solver: SparseSolver})
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	r1, r4 := run(1), run(4)
	for j := range r1.Estimate {
		if r1.Estimate[j] != r4.Estimate[j] || r1.Uncertainty[j] != r4.Uncertainty[j] {
			t.Fatalf("bin %d: %v ± %v with 1 core, %v ± %v with 4", j, r1.Estimate[j], r1.Uncertainty[j], r4.Estimate[j], r4.Uncertainty[j])
		}
	}
	if DetailsOf(r1).Tau != DetailsOf(r4).Tau {
		t.Error("the chosen tau depends on the number of cores")
	}
}
