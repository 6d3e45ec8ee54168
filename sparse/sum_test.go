package sparse

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// weightedMatrix is randomMatrix with sums of squared weights: the
// square of each value plus a positive spread.
func weightedMatrix(t *testing.T, rng *rand.Rand, rows, cols int, density float64) *Matrix {
	t.Helper()
	m := randomMatrix(t, rng, rows, cols, density, 3)
	w2 := make([]float64, m.NNZ())
	for p, v := range m.Values() {
		w2[p] = v*v + rng.Float64()
	}
	out, err := NewMatrix(rows, cols, m.ColPtr(), m.RowIdx(), m.Values(), w2)
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// denseW2 is the dense copy of m's sums of squared weights.
func denseW2(m *Matrix) *mat.Dense {
	rows, cols := m.Dims()
	d := mat.NewDense(rows, cols, nil)
	for j := 0; j < cols; j++ {
		for p := m.ColPtr()[j]; p < m.ColPtr()[j+1]; p++ {
			d.Set(m.RowIdx()[p], j, m.SumW2()[p])
		}
	}
	return d
}

// TestSumMatchesDense compares Sum with gonum's dense Add applied in
// argument order (gonum is the reference library). Adding the stored
// cells left to right is the dense left fold exactly (x + 0 == x in IEEE
// 754 arithmetic, common practice), so the comparison is bit for bit.
func TestSumMatchesDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 9))
	for _, k := range []int{1, 2, 3, 7, 20} {
		const rows, cols = 37, 23
		ms := make([]*Matrix, k)
		want := mat.NewDense(rows, cols, nil)
		want2 := mat.NewDense(rows, cols, nil)
		stored := make(map[[2]int]bool)
		for q := range ms {
			ms[q] = weightedMatrix(t, rng, rows, cols, 0.05+0.3*rng.Float64())
			d, err := ms[q].ToDense()
			if err != nil {
				t.Fatal(err)
			}
			want.Add(want, d)
			want2.Add(want2, denseW2(ms[q]))
			for j := 0; j < cols; j++ {
				for p := ms[q].ColPtr()[j]; p < ms[q].ColPtr()[j+1]; p++ {
					stored[[2]int{ms[q].RowIdx()[p], j}] = true
				}
			}
		}
		got, err := Sum(ms...)
		if err != nil {
			t.Fatal(err)
		}
		if got.NNZ() != len(stored) {
			t.Errorf("K=%d: %d cells stored, want the %d of the union", k, got.NNZ(), len(stored))
		}
		gd, _ := got.ToDense()
		g2 := denseW2(got)
		for i := 0; i < rows; i++ {
			for j := 0; j < cols; j++ {
				if a, b := gd.At(i, j), want.At(i, j); math.Float64bits(a) != math.Float64bits(b) {
					t.Fatalf("K=%d: cell (%d,%d) = %v, dense sum %v", k, i, j, a, b)
				}
				if a, b := g2.At(i, j), want2.At(i, j); math.Float64bits(a) != math.Float64bits(b) {
					t.Fatalf("K=%d: squared weights of (%d,%d) = %v, dense sum %v", k, i, j, a, b)
				}
			}
		}
		// Folding in consecutive groups gives the same bits.
		if k >= 3 {
			head, err := Sum(ms[:2]...)
			if err != nil {
				t.Fatal(err)
			}
			folded, err := Sum(append([]*Matrix{head}, ms[2:]...)...)
			if err != nil {
				t.Fatal(err)
			}
			for p, v := range folded.Values() {
				if math.Float64bits(v) != math.Float64bits(got.Values()[p]) || folded.RowIdx()[p] != got.RowIdx()[p] {
					t.Fatalf("K=%d: folding in groups changes entry %d", k, p)
				}
			}
		}
	}
}

// TestSumCancellationAndErrors: a cell whose values cancel stays stored
// (its squared weights are positive), without squared weights in one
// argument the result has none, and mismatched dimensions are refused.
func TestSumCancellationAndErrors(t *testing.T) {
	a, _ := NewMatrix(2, 2, []int{0, 1, 1}, []int{1}, []float64{2.5}, []float64{6.25})
	b, _ := NewMatrix(2, 2, []int{0, 1, 1}, []int{1}, []float64{-2.5}, []float64{6.25})
	s, err := Sum(a, b)
	if err != nil {
		t.Fatal(err)
	}
	if s.NNZ() != 1 || s.Values()[0] != 0 || s.SumW2()[0] != 12.5 {
		t.Errorf("cancelled cell: %v %v, want stored 0 with squared weights 12.5", s.Values(), s.SumW2())
	}
	c, _ := NewMatrix(2, 2, []int{0, 0, 1}, []int{0}, []float64{1}, nil)
	if s, err := Sum(a, c); err != nil || s.SumW2() != nil || s.NNZ() != 2 {
		t.Errorf("Sum with an argument without squared weights: %v, %v", s, err)
	}
	d, _ := NewMatrix(3, 2, []int{0, 0, 0}, nil, nil, nil)
	if _, err := Sum(a, d); err == nil {
		t.Error("Sum of a 2×2 and a 3×2 matrix accepted")
	}
	if _, err := Sum(); err == nil {
		t.Error("Sum of nothing accepted")
	}
	big, _ := NewMatrix(2, 2, []int{0, 1, 1}, []int{0}, []float64{math.MaxFloat64}, nil)
	if _, err := Sum(big, big); err == nil {
		t.Error("an overflowing sum accepted")
	}
}

// TestSumColumnRangesSameBits sums matrices large enough for Sum to merge
// ranges of columns in parallel, with 1, 2, 3 and 8 cores, and compares
// every cell with a left fold written here over a map of cells (the
// definition of Sum: the stored values added in argument order, starting
// from the first), bit for bit; every third column is stored by none.
func TestSumColumnRangesSameBits(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 5))
	const rows, cols = 400, 1500
	ms := make([]*Matrix, 5)
	type cell struct{ v, w2 float64 }
	want := map[[2]int]*cell{}
	for q := range ms {
		ms[q] = weightedMatrix(t, rng, rows, cols, 0.05+0.1*float64(q))
		m := ms[q]
		for j := 0; j < cols; j++ {
			for p := m.ColPtr()[j]; p < m.ColPtr()[j+1]; p++ {
				key := [2]int{m.RowIdx()[p], j}
				if c := want[key]; c != nil {
					c.v += m.Values()[p]
					c.w2 += m.SumW2()[p]
				} else {
					want[key] = &cell{m.Values()[p], m.SumW2()[p]}
				}
			}
		}
	}
	var in int
	for _, m := range ms {
		in += m.NNZ()
	}
	if in < sumParallelCells {
		t.Fatalf("%d input cells: too few for the parallel merge (%d)", in, sumParallelCells)
	}
	for _, procs := range []int{1, 2, 3, 8} {
		old := runtime.GOMAXPROCS(procs)
		got, err := Sum(ms...)
		runtime.GOMAXPROCS(old)
		if err != nil {
			t.Fatal(err)
		}
		if got.NNZ() != len(want) {
			t.Fatalf("%d cores: %d cells, want %d", procs, got.NNZ(), len(want))
		}
		for j := 0; j < cols; j++ {
			last := -1
			for p := got.ColPtr()[j]; p < got.ColPtr()[j+1]; p++ {
				r := got.RowIdx()[p]
				c := want[[2]int{r, j}]
				if c == nil || r <= last {
					t.Fatalf("%d cores: cell (%d,%d) not expected there", procs, r, j)
				}
				last = r
				if math.Float64bits(got.Values()[p]) != math.Float64bits(c.v) || math.Float64bits(got.SumW2()[p]) != math.Float64bits(c.w2) {
					t.Fatalf("%d cores: cell (%d,%d) = %v, %v; want %v, %v", procs, r, j, got.Values()[p], got.SumW2()[p], c.v, c.w2)
				}
			}
		}
	}
}
