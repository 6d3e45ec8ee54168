package bayes

import (
	"context"
	"math"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold"
	"gonum.org/v1/gonum/mat"
)

// TestScanRowsAreFixedIterationRuns checks the iteration scan: with Scan
// the estimate, the history and the per-bin variance of every iteration
// k are, bit for bit, those of a separate run with k fixed iterations,
// for each uncertainty computation that passes through the iterations
// (exact Jacobian, probes, toys; method.md §8 Linearised uncertainty
// propagation and §9 Probes and toys), with a background and with
// smoothing. The estimates are also checked against a dense
// implementation of the iteration written here with gonum (method.md §3
// The iteration, D'Agostini, Nucl. Instrum. Meth. A 362 (1995) 487).
func TestScanRowsAreFixedIterationRuns(t *testing.T) {
	ctx := context.Background()
	p := randomProblem(t, 3, 12, 16, 5, true)
	for _, c := range []struct {
		name string
		o    opts
	}{
		{"exact", opts{Iterations: 6, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}},
		{"probes", opts{Iterations: 6, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 20, Seed: 4}},
		{"toys", opts{Iterations: 5, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 30, Seed: 4}},
		{"stop-chi2", opts{StopChi2: 0.5, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}},
		{"subtract", opts{Iterations: 4, Background: unfold.Subtract, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}},
		{"none", opts{Iterations: 4}},
		{"smoothing-exact", opts{Iterations: 4, Smoothing: &Smoothing{Neighbours: chainScheme(t, 12), Strength: 0.5}, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}},
		{"smoothing-probes", opts{Iterations: 4, Smoothing: &Smoothing{Neighbours: chainScheme(t, 12), Strength: 0.5}, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 10, Seed: 2}},
	} {
		t.Run(c.name, func(t *testing.T) {
			s, m := c.o.split()
			m.Scan = true
			res, err := unfold.Unfold(ctx, p, s, m)
			if err != nil {
				t.Fatal(err)
			}
			d := DetailsOf(res)
			if len(res.StepEstimates) != d.Iterations+1 || len(d.History) != d.Iterations+1 {
				t.Fatalf("%d estimates and %d steps for %d iterations", len(res.StepEstimates), len(d.History), d.Iterations)
			}
			if c.o.Covariance == unfold.NoCovariance {
				if res.StepVariance != nil {
					t.Errorf("variances without an uncertainty computation")
				}
			} else if len(res.StepVariance) != d.Iterations+1 {
				t.Fatalf("%d step variances for %d iterations", len(res.StepVariance), d.Iterations)
			}
			if !slices.Equal(res.StepEstimates[d.Iterations], res.Estimate) {
				t.Errorf("the last kept estimate is not the result")
			}
			for k := 1; k <= d.Iterations; k++ {
				ref, err := unfold.Unfold(ctx, p, s, m.WithIterations(k))
				if err != nil {
					t.Fatal(err)
				}
				rd := DetailsOf(ref)
				if !slices.Equal(res.StepEstimates[k], ref.Estimate) {
					t.Errorf("k=%d: the kept estimate differs from a run of %d iterations", k, k)
				}
				if !slices.Equal(d.History[:k+1], rd.History) {
					t.Errorf("k=%d: history %v, a run of %d iterations %v", k, d.History[:k+1], k, rd.History)
				}
				if ref.Uncertainty != nil {
					for j, u := range ref.Uncertainty {
						if v := res.StepVariance[k][j]; res.Determined[j] && v > 0 && math.Sqrt(v) != u {
							t.Errorf("k=%d bin %d: variance %v at the step, a run of %d iterations σ² = %v", k, j, v, k, u*u)
						}
					}
				}
			}
			if c.o.Background == unfold.InModel && c.o.Iterations > 0 && c.o.Smoothing == nil {
				dense := denseIterations(p, d.Iterations)
				for k, mu := range dense {
					if e := maxRelDiff(mu, res.StepEstimates[k]); e > 1e-12 {
						t.Errorf("k=%d: kept estimate differs from the dense iteration by %.2g", k, e)
					}
				}
			}
		})
	}
}

// denseIterations runs the iteration of method.md §3 densely with gonum
// from the generated spectrum as prior, scaled to the data minus the
// background: μ_j(k+1) = μ_j(k)/eps_j Σ_i R_ij n_i/ν_i(k), ν = R μ + b.
// It returns μ(0..K).
func denseIterations(p *unfold.Problem, K int) [][]float64 {
	r := denseR(p.Migrations, p.Generated)
	nr, nt := r.Dims()
	eps := make([]float64, nt)
	var sumEP, net float64
	for j := range nt {
		eps[j] = mat.Sum(r.ColView(j))
		sumEP += eps[j] * p.Generated[j]
	}
	for i := range nr {
		net += p.Data[i] - p.Background[i]
	}
	mu := mat.NewVecDense(nt, nil)
	for j := range nt {
		mu.SetVec(j, p.Generated[j]*net/sumEP)
	}
	out := [][]float64{slices.Clone(mu.RawVector().Data)}
	nu, y, g := mat.NewVecDense(nr, nil), mat.NewVecDense(nr, nil), mat.NewVecDense(nt, nil)
	for range K {
		nu.MulVec(r, mu)
		for i := range nr {
			y.SetVec(i, p.Data[i]/(nu.AtVec(i)+p.Background[i]))
		}
		g.MulVec(r.T(), y)
		for j := range nt {
			mu.SetVec(j, mu.AtVec(j)*g.AtVec(j)/eps[j])
		}
		out = append(out, slices.Clone(mu.RawVector().Data))
	}
	return out
}
