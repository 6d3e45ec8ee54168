package validate

import (
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"gonum.org/v1/gonum/mat"
)

// denseProblem builds a problem from a dense migration matrix A (rows
// reco, columns truth) and the generated counts.
func denseProblem(t testing.TB, a *mat.Dense, gen []float64) *unfold.Problem {
	t.Helper()
	nr, nt := a.Dims()
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	for j := range nt {
		for i := range nr {
			if v := a.At(i, j); v != 0 {
				rowIdx = append(rowIdx, i)
				val = append(val, v)
			}
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	m, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	data := make([]float64, nr)
	for i := range nr {
		data[i] = mat.Sum(a.RowView(i))
	}
	return &unfold.Problem{Migrations: m, Generated: gen, Data: data}
}

// iterations is the method at k iterations.
func iterations(k int) unfold.Method { return &bayes.Settings{Iterations: k} }
