package unfold

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat"
)

// ensembleSamples returns m correlated vectors of length n.
func ensembleSamples(m, n int, seed uint64) *mat.Dense {
	rng := rand.New(rand.NewPCG(seed, 1))
	x := mat.NewDense(m, n, nil)
	for i := range m {
		common := rng.NormFloat64()
		for j := range n {
			x.Set(i, j, 1e3*float64(j+1)+common*float64(j%3)+rng.NormFloat64()*0.1*float64(j+1))
		}
	}
	return x
}

func relClose(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}

// The running mean and covariance equal gonum's two-pass estimates
// (stat.CovarianceMatrix, the unbiased sample covariance) to rounding:
// Welford (1962), method.md §17.
func TestEnsembleAgainstTwoPass(t *testing.T) {
	const m, n = 500, 7
	x := ensembleSamples(m, n, 3)
	var want mat.SymDense
	stat.CovarianceMatrix(&want, x, nil)
	full, diag := NewEnsemble(n, true), NewEnsemble(n, false)
	for i := range m {
		full.Add(x.RawRowView(i))
		diag.Add(x.RawRowView(i))
	}
	cov := full.Covariance(nil)
	vd := diag.Variances(nil)
	vf := full.Variances(nil)
	for j := range n {
		if mean := stat.Mean(mat.Col(nil, j, x), nil); !relClose(full.Mean[j], mean, 1e-13) {
			t.Errorf("mean %d: %v, two-pass %v", j, full.Mean[j], mean)
		}
		for k := range n {
			if !relClose(cov.At(j, k), want.At(j, k), 1e-9) {
				t.Errorf("cov %d,%d: %v, two-pass %v", j, k, cov.At(j, k), want.At(j, k))
			}
		}
		if vd[j] != vf[j] || vf[j] != cov.At(j, j) {
			t.Errorf("variance %d: diagonal ensemble %v, full %v, covariance %v (the same update: must be equal)", j, vd[j], vf[j], cov.At(j, j))
		}
	}
	if full.N != m {
		t.Errorf("N = %d, want %d", full.N, m)
	}
}

// An ensemble split into 1, 2, 7 and 64 parts and merged with the
// pairwise formula of Chan, Golub and LeVeque (1979; method.md §17) gives
// the mean and covariance of the whole to 1e-12 relative (covariances
// relative to sqrt(C_jj C_kk)).
func TestEnsembleMergeParts(t *testing.T) {
	const m, n = 640, 5
	x := ensembleSamples(m, n, 9)
	for _, full := range []bool{true, false} {
		whole := NewEnsemble(n, full)
		for i := range m {
			whole.Add(x.RawRowView(i))
		}
		for _, parts := range []int{1, 2, 7, 64} {
			merged := NewEnsemble(n, full)
			for p := range parts {
				part := NewEnsemble(n, full)
				for i := p * m / parts; i < (p+1)*m/parts; i++ {
					part.Add(x.RawRowView(i))
				}
				merged.Merge(part)
			}
			if merged.N != whole.N {
				t.Fatalf("parts %d: N = %d, want %d", parts, merged.N, whole.N)
			}
			for j := range n {
				if !relClose(merged.Mean[j], whole.Mean[j], 1e-12) {
					t.Errorf("full %v, parts %d: mean %d = %v, whole %v", full, parts, j, merged.Mean[j], whole.Mean[j])
				}
			}
			// Relative to the scale of the entry, sqrt(C_jj C_kk): an
			// off-diagonal co-moment near zero has no scale of its own.
			vw, vm := whole.Variances(nil), merged.Variances(nil)
			for j := range n {
				if !relClose(vm[j], vw[j], 1e-12) {
					t.Errorf("full %v, parts %d: variance %d = %v, whole %v", full, parts, j, vm[j], vw[j])
				}
			}
			if full {
				cw, cm := whole.Covariance(nil), merged.Covariance(nil)
				for j := range n {
					for k := range n {
						if d := math.Abs(cm.At(j, k) - cw.At(j, k)); d > 1e-12*math.Sqrt(vw[j]*vw[k]) {
							t.Errorf("parts %d: covariance %d,%d = %v, whole %v", parts, j, k, cm.At(j, k), cw.At(j, k))
						}
					}
				}
			}
		}
	}
}

// Fewer than two vectors give zero variances; merging an empty ensemble
// changes nothing.
func TestEnsembleEdges(t *testing.T) {
	e := NewEnsemble(3, true)
	e.Add([]float64{1, 2, 3})
	for _, v := range e.Variances(nil) {
		if v != 0 {
			t.Fatalf("variance of one vector = %v, want 0", v)
		}
	}
	before := append([]float64(nil), e.M2...)
	e.Merge(NewEnsemble(3, true))
	for p := range before {
		if e.M2[p] != before[p] || e.N != 1 {
			t.Fatal("merging an empty ensemble changed the ensemble")
		}
	}
}

// The totals are the sums of independent sources (method.md §18): the
// variances add, the covariances add when every source has one, and
// the total covariance is absent when one source has only variances.
func TestAddSourceTotals(t *testing.T) {
	r := &Result{Estimate: make([]float64, 3), Determined: []bool{true, true, false}}
	a := mat.NewSymDense(3, []float64{4, 1, 0, 1, 9, 0, 0, 0, 0})
	b := mat.NewSymDense(3, []float64{1, -1, 0, -1, 16, 0, 0, 0, 0})
	r.AddSource(Source{Name: SourceData, Variance: []float64{4, 9, 0}, Covariance: a})
	if r.Covariance != a || r.Uncertainty[1] != 3 {
		t.Fatalf("one source: totals %v, %v", r.Uncertainty, r.Covariance)
	}
	r.AddSource(Source{Name: SourceSimulation, Variance: []float64{1, 16, 5}, Covariance: b})
	if want := []float64{math.Sqrt(5), 5, 0}; r.Uncertainty[0] != want[0] || r.Uncertainty[1] != want[1] || r.Uncertainty[2] != 0 {
		t.Errorf("total uncertainty %v, want %v (undetermined bins 0)", r.Uncertainty, want)
	}
	if r.Covariance.At(0, 1) != 0 || r.Covariance.At(1, 1) != 25 || a.At(1, 1) != 9 {
		t.Errorf("total covariance %v (sources unchanged: %v)", mat.Formatted(r.Covariance), a.At(1, 1))
	}
	r.AddSource(Source{Name: "scale", Variance: []float64{1, 1, 1}})
	if r.Covariance != nil {
		t.Error("a total covariance without one source's correlations")
	}
	if r.Uncertainty[0] != math.Sqrt(6) || r.Source("scale") == nil || r.Source("none") != nil {
		t.Errorf("uncertainty %v, lookup by name", r.Uncertainty)
	}
}
