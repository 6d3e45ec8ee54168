package unfold

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// denseProblem builds a Problem from a dense response R (rows reco,
// columns truth) with G_j = 1, so that A = R.
func denseProblem(t testing.TB, r [][]float64, n []float64) *Problem {
	t.Helper()
	nr, nt := len(r), len(r[0])
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	for j := 0; j < nt; j++ {
		for i := 0; i < nr; i++ {
			if r[i][j] != 0 {
				rowIdx = append(rowIdx, i)
				val = append(val, r[i][j])
			}
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	g := make([]float64, nt)
	for j := range g {
		g[j] = 1
	}
	return &Problem{Migrations: a, Generated: g, Data: n}
}

func unfoldOrFail(t testing.TB, p *Problem, s *Settings) *Result {
	t.Helper()
	res, err := Unfold(context.Background(), p, s)
	if err != nil {
		t.Fatal(err)
	}
	return res
}

func near(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(1, math.Max(math.Abs(a), math.Abs(b)))
}

// Oracle A of the project's methods notes (section 7): exact rationals of
// the D'Agostini / EM update for R = [[0.8,0.1],[0.2,0.9]], n = (250,150),
// flat prior. Derived by hand (exact fractions), so this is a closed-form
// check.
func TestOracleAExactRationals(t *testing.T) {
	p := denseProblem(t, [][]float64{{0.8, 0.1}, {0.2, 0.9}}, []float64{250, 150})
	want := [][2]float64{
		{24700.0 / 99, 14900.0 / 99},
		{1702324.0 / 6239, 793276.0 / 6239},
		{284.67344551, 115.32655449},
	}
	for k, w := range want {
		res := unfoldOrFail(t, p, &Settings{Iterations: k + 1})
		tol := 1e-14
		if k == 2 {
			tol = 1e-10 // quoted to 8 decimals
		}
		for j := range w {
			if !near(res.Estimate[j], w[j], tol) {
				t.Errorf("iteration %d bin %d: got %.12g, want %.12g", k+1, j, res.Estimate[j], w[j])
			}
		}
	}
}
