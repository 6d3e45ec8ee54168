package validate

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// smeared is a problem with strong migrations: each truth bin stays in
// its reco bin with probability 0.36·eff and moves to each neighbour with
// 0.3·eff (eff = 0.9), and a steeply falling truth far from the
// flat prior.
func smeared(t *testing.T) (*mat.Dense, []float64, []float64, []float64) {
	const nt = 8
	r := mat.NewDense(nt, nt, nil)
	gen := make([]float64, nt)
	truth := make([]float64, nt)
	prior := make([]float64, nt)
	for j := range nt {
		gen[j] = 1e5
		prior[j] = 1
		truth[j] = 800 * math.Exp(-0.3*float64(j))
		for i, w := range map[int]float64{j - 1: 0.3, j: 0.36, j + 1: 0.3} {
			if i >= 0 && i < nt {
				r.Set(i, j, 0.9*w)
			}
		}
	}
	return r, gen, truth, prior
}

// denseIteration runs k iterations of D'Agostini's formulas (method.md
// §3 The iteration) on dense gonum vectors: μ(0) = p Σn/Σ eps p,
// μ(k+1) = μ(k)/eps ∘ Rᵀ(n/(R μ(k))). It is independent of the sparse
// kernels.
func denseIteration(r *mat.Dense, n, prior []float64, k int) []float64 {
	nr, nt := r.Dims()
	eps := make([]float64, nt)
	var sn, sep float64
	for _, x := range n {
		sn += x
	}
	for j := range nt {
		eps[j] = mat.Sum(r.ColView(j))
		sep += eps[j] * prior[j]
	}
	mu := mat.NewVecDense(nt, nil)
	for j := range nt {
		mu.SetVec(j, prior[j]*sn/sep)
	}
	nu := mat.NewVecDense(nr, nil)
	y := mat.NewVecDense(nr, nil)
	g := mat.NewVecDense(nt, nil)
	for range k {
		nu.MulVec(r, mu)
		for i := range nr {
			if v := nu.AtVec(i); v > 0 {
				y.SetVec(i, n[i]/v)
			} else {
				y.SetVec(i, 0)
			}
		}
		g.MulVec(r.T(), y)
		for j := range nt {
			mu.SetVec(j, mu.AtVec(j)*g.AtVec(j)/eps[j])
		}
	}
	return mu.RawVector().Data
}

// TestMigrationsScan: with strong migrations and a prior far from the
// truth, the coverage of the truth rises with k while the variance rises
// (regularisation by early stopping, common practice), and the
// recommended k is where the summed mean squared error, recomputed here
// toy by toy with the dense iteration, is smallest.
func TestMigrationsScan(t *testing.T) {
	r, gen, truth, prior := smeared(t)
	nt := len(gen)
	a := mat.NewDense(nt, nt, nil)
	for j := range nt {
		for i := range nt {
			a.Set(i, j, r.At(i, j)*gen[j])
		}
	}
	p := denseProblem(t, a, gen)
	p.Prior = prior
	const K, toys = 12, 200
	c := &Config{Problem: p, Method: iterations, MaxK: K, Truth: truth, Toys: toys, Seed: 3}
	e, err := Run(context.Background(), c, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	scan := e.Scan()
	sumVar := func(pt Point) float64 {
		var s float64
		for _, v := range pt.Variance {
			s += v
		}
		return s
	}
	for k := 1; k < K; k++ {
		if sumVar(scan[k]) <= sumVar(scan[k-1]) {
			t.Errorf("summed variance falls from k=%d (%v) to k=%d (%v)", k, sumVar(scan[k-1]), k+1, sumVar(scan[k]))
		}
	}
	if lo, hi := scan[0].CoverageMean, scan[K-1].CoverageMean; !(hi > lo+5*scan[K-1].CoverageExpectedError) {
		t.Errorf("coverage does not rise with k: %v at k=1, %v at k=%d", lo, hi, K)
	}

	// The MSE curve, recomputed with the dense iteration on the same
	// pseudo-data.
	ref := make([]float64, K)
	nu := make([]float64, nt)
	for i := range nt {
		for j := range nt {
			nu[i] += r.At(i, j) * truth[j]
		}
	}
	n := make([]float64, nt)
	for toy := range toys {
		poisson(n, nu, c.Seed, toyStream+uint64(toy))
		for k := 1; k <= K; k++ {
			mu := denseIteration(r, n, prior, k)
			for j, x := range mu {
				ref[k-1] += (x - truth[j]) * (x - truth[j]) / toys
			}
		}
	}
	best := 0
	for k := range K {
		if math.Abs(scan[k].MSE-ref[k]) > 1e-9*ref[k] {
			t.Errorf("k=%d: mse %v, dense iteration %v", k+1, scan[k].MSE, ref[k])
		}
		if ref[k] < ref[best] {
			best = k
		}
	}
	rec, err := Recommend(scan, MinMSE, 0)
	if err != nil {
		t.Fatal(err)
	}
	if rec.K != best+1 || best == 0 || best == K-1 {
		t.Errorf("recommended k=%d, the dense curve is smallest at k=%d (of 1..%d): %v", rec.K, best+1, K, ref)
	}
	t.Logf("mse curve %v, coverage %v .. %v", ref, scan[0].CoverageMean, scan[K-1].CoverageMean)
}
