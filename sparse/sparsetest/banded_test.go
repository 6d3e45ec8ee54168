package sparsetest

import (
	"math"
	"testing"
)

// TestBanded3DStructure checks the synthetic response against its
// definition: every row of column j lies in the hood of j's mapped reco
// cell, columns keep min(perCol, candidates) entries, and each column sums
// to an efficiency in [0.6, 0.95].
func TestBanded3DStructure(t *testing.T) {
	truth, reco, hood := [3]int{5, 4, 3}, [3]int{5, 8, 6}, [3]int{3, 3, 4}
	m, err := Banded3D(truth, reco, hood, 20, 7)
	if err != nil {
		t.Fatal(err)
	}
	if m.Rows != 5*8*6 || m.Cols != 5*4*3 || len(m.ColPtr) != m.Cols+1 || len(m.RowIdx) != len(m.Val) {
		t.Fatalf("%d×%d with %d column pointers, %d rows and %d values", m.Rows, m.Cols, len(m.ColPtr), len(m.RowIdx), len(m.Val))
	}
	cp, ri := m.ColPtr, m.RowIdx
	for j := 0; j < m.Cols; j++ {
		tc := [3]int{j % truth[0], (j / truth[0]) % truth[1], j / (truth[0] * truth[1])}
		cand := 1
		var lo, hi [3]int
		for a := 0; a < 3; a++ {
			c := int((float64(tc[a]) + 0.5) * float64(reco[a]) / float64(truth[a]))
			lo[a], hi[a] = max(c-hood[a]/2, 0), min(c-hood[a]/2+hood[a], reco[a])
			cand *= hi[a] - lo[a]
		}
		if n := cp[j+1] - cp[j]; n != min(20, cand) {
			t.Fatalf("column %d has %d entries, want min(20, %d)", j, n, cand)
		}
		eff := 0.0
		for k := cp[j]; k < cp[j+1]; k++ {
			if k > cp[j] && ri[k] <= ri[k-1] {
				t.Fatalf("column %d: rows %d, %d not increasing", j, ri[k-1], ri[k])
			}
			eff += m.Val[k]
			r := [3]int{ri[k] % reco[0], (ri[k] / reco[0]) % reco[1], ri[k] / (reco[0] * reco[1])}
			for a := 0; a < 3; a++ {
				if r[a] < lo[a] || r[a] >= hi[a] {
					t.Fatalf("column %d: row %d (cell %v) outside the hood [%v, %v)", j, ri[k], r, lo, hi)
				}
			}
		}
		if eff < 0.6-1e-12 || eff > 0.95+1e-12 || math.IsNaN(eff) {
			t.Fatalf("column %d sums to %v, outside [0.6, 0.95]", j, eff)
		}
	}
	if _, err := Banded3D([3]int{0, 1, 1}, reco, hood, 20, 1); err == nil {
		t.Error("zero-sized truth grid accepted")
	}
	if _, err := Banded3D(truth, reco, hood, 0, 1); err == nil {
		t.Error("zero entries per column accepted")
	}
	if _, err := Banded3D([3]int{1 << 11, 1 << 11, 1 << 10}, reco, hood, 20, 1); err == nil {
		t.Error("a truth grid of 2^32 cells accepted")
	}
}
