package unfold_test

import (
	"context"
	"errors"
	"runtime"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// banded returns a problem of n truth and n reco bins with a migration
// to each neighbour (efficiency 0.9) and data following the generated
// spectrum.
func banded(t *testing.T, n int) *unfold.Problem {
	t.Helper()
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	gen := make([]float64, n)
	data := make([]float64, n)
	for j := range n {
		gen[j] = 1000 + float64(j%7)
		for _, i := range []int{j - 1, j, j + 1} {
			if i >= 0 && i < n {
				w := 0.15 * gen[j]
				if i == j {
					w = 0.6 * gen[j]
				}
				rowIdx = append(rowIdx, i)
				val = append(val, w)
				data[i] += w
			}
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	m, err := sparse.NewMatrix(n, n, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return &unfold.Problem{Migrations: m, Generated: gen, Data: data}
}

// allocated returns the bytes Unfold allocates on p with s
// (runtime.MemStats.TotalAlloc, an upper bound of the peak heap).
func allocated(t *testing.T, p *unfold.Problem, s *unfold.Settings) uint64 {
	t.Helper()
	var before, after runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&before)
	if _, err := unfold.Unfold(context.Background(), p, s, &bayes.Settings{Iterations: 4}); err != nil {
		t.Fatal(err)
	}
	runtime.ReadMemStats(&after)
	return after.TotalAlloc - before.TotalAlloc
}

// The per-bin variances by probes and by toys stay within the memory
// limit, their overhead included: everything the uncertainty
// computation allocates (what Unfold allocates beyond the same
// unfolding without an uncertainty; runtime.MemStats.TotalAlloc, an
// upper bound of the peak heap) is below the limit, for limits that
// bound the batch of probes (the definition of Settings.MemoryLimit).
// A limit too small for one probe or one toy is refused.
func TestProbesAndToysWithinMemoryLimit(t *testing.T) {
	if testing.Short() {
		t.Skip("allocates tens of megabytes")
	}
	p := banded(t, 20000)
	base := allocated(t, p, nil)
	for _, limit := range []int64{8 << 20, 16 << 20, 48 << 20} {
		for _, s := range []*unfold.Settings{
			{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 400, Seed: 1, MemoryLimit: limit},
			{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 24, Seed: 1, MemoryLimit: limit},
		} {
			a := allocated(t, p, s) - base
			t.Logf("%v, limit %d MB: %.1f MB allocated by the uncertainty", s.DiagonalMethod, limit>>20, float64(a)/(1<<20))
			if int64(a) > limit {
				t.Errorf("%v: %.1f MB allocated, above the memory limit of %d MB", s.DiagonalMethod, float64(a)/(1<<20), limit>>20)
			}
		}
	}
	for _, m := range []unfold.DiagonalMethod{unfold.DiagonalProbes, unfold.DiagonalToys} {
		_, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: m, MemoryLimit: 1 << 20}, &bayes.Settings{Iterations: 4})
		var tl *unfold.TooLargeError
		if !errors.As(err, &tl) {
			t.Errorf("%v within 1 MB: %v, want a *TooLargeError", m, err)
		}
	}
}
