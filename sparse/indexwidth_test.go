package sparse

import (
	"math/rand/v2"
	"slices"
	"testing"
	"time"
)

// The index width: the same serial fused sweep (gather g_j = (Aᵀ y)_j,
// x_j ← x_j g_j / ε_j, scatter into the next fold) over the CSC arrays
// of a Matrix with 8-byte row indices, as stored, and with a 4-byte copy
// of them. The arithmetic and its order are the same, so the bits are.

type rowIndex interface{ ~int | ~int32 }

// sweepCSC is the serial fused sweep on CSC arrays with row indices of
// type I: next is overwritten, x updated in place.
func sweepCSC[I rowIndex](next, y, x, eps []float64, colPtr []int, ri []I, val []float64) {
	clear(next)
	for j := range x {
		lo, hi := colPtr[j], colPtr[j+1]
		var g float64
		for k := lo; k < hi; k++ {
			g += val[k] * y[ri[k]]
		}
		v := x[j] * g / eps[j]
		x[j] = v
		for k := lo; k < hi; k++ {
			next[ri[k]] += val[k] * v
		}
	}
}

func narrow(ri []int) []int32 {
	out := make([]int32, len(ri))
	for k, i := range ri {
		out[k] = int32(i)
	}
	return out
}

// The 4-byte sweep gives the bits of the 8-byte one, and the 8-byte one
// agrees with the matrix's own Sweep (the production kernel) to rounding
// (1e-12 relative), on a random matrix.
func TestIndexWidthSameBits(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	m, err := banded3D([3]int{10, 8, 6}, [3]int{10, 8, 12}, [3]int{3, 3, 4}, 12, 7)
	if err != nil {
		t.Fatal(err)
	}
	y := make([]float64, m.rows)
	for i := range y {
		y[i] = rng.Float64() + 0.5
	}
	eps := make([]float64, m.cols)
	m.ColSums(eps)
	start := make([]float64, m.cols)
	for j := range start {
		start[j] = rng.Float64() + 0.5
	}
	x8, x4, xs := slices.Clone(start), slices.Clone(start), slices.Clone(start)
	n8, n4, ns := make([]float64, m.rows), make([]float64, m.rows), make([]float64, m.rows)
	sweepCSC(n8, y, x8, eps, m.ColPtr(), m.RowIdx(), m.Values())
	sweepCSC(n4, y, x4, eps, m.ColPtr(), narrow(m.RowIdx()), m.Values())
	m.Sweep(ns, y, func(j int, g float64) float64 {
		v := xs[j] * g / eps[j]
		xs[j] = v
		return v
	})
	for i := range n8 {
		if n8[i] != n4[i] {
			t.Fatalf("row %d: 4-byte sweep %v, 8-byte %v", i, n4[i], n8[i])
		}
		if d := n8[i] - ns[i]; d > 1e-12*ns[i] || d < -1e-12*ns[i] {
			t.Fatalf("row %d: 8-byte sweep %v, Sweep %v", i, n8[i], ns[i])
		}
	}
	for j := range x8 {
		if x8[j] != x4[j] {
			t.Fatalf("column %d: 4-byte sweep %v, 8-byte %v", j, x4[j], x8[j])
		}
	}
}

// BenchmarkIndexWidth times the serial fused sweep with 8-byte and with
// 4-byte row indices on the fine grid, alternately in one loop (one
// goroutine), and reports the median time of each over the rounds and
// the median of the per-round ratios 4-byte / 8-byte.
func BenchmarkIndexWidth(b *testing.B) {
	m := fineMatrix(b)
	colPtr, ri8, val := m.ColPtr(), m.RowIdx(), m.Values()
	ri4 := narrow(ri8)
	eps := make([]float64, m.cols)
	m.ColSums(eps)
	y := make([]float64, m.rows)
	for i := range y {
		y[i] = 1
	}
	x8, x4 := make([]float64, m.cols), make([]float64, m.cols)
	next := make([]float64, m.rows)
	reset := func(x []float64) {
		for j := range x {
			x[j] = 1
		}
	}
	var t8, t4, ratio []float64
	for b.Loop() {
		reset(x8)
		s := time.Now()
		sweepCSC(next, y, x8, eps, colPtr, ri8, val)
		d8 := time.Since(s).Seconds()
		reset(x4)
		s = time.Now()
		sweepCSC(next, y, x4, eps, colPtr, ri4, val)
		d4 := time.Since(s).Seconds()
		t8, t4, ratio = append(t8, d8), append(t4, d4), append(ratio, d4/d8)
	}
	med := func(v []float64) float64 {
		v = slices.Clone(v)
		slices.Sort(v)
		return v[len(v)/2]
	}
	b.ReportMetric(med(t8)*1e3, "ms-8byte")
	b.ReportMetric(med(t4)*1e3, "ms-4byte")
	b.ReportMetric(med(ratio), "ratio-4/8")
	b.ReportMetric(float64(16*m.NNZ()+8*(m.cols+1))/float64(m.NNZ()), "B/nnz-8byte")
	b.ReportMetric(float64(12*m.NNZ()+8*(m.cols+1))/float64(m.NNZ()), "B/nnz-4byte")
}
