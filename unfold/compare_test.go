package unfold

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// A diagonal covariance: the pseudo-inverse is the inverse, so the
// chi-square is the plain sum of squared pulls with one degree of
// freedom per bin (method.md §19 Comparison with a reference spectrum).
func TestCompareDiagonalIsPlainSum(t *testing.T) {
	ref := []float64{100, 200, 300, 400, 0}
	est := []float64{110, 190, 330, 400, 5}
	unc := []float64{5, 10, 15, 20, 0}
	det := []bool{true, true, true, true, false}
	cov := mat.NewSymDense(5, nil)
	var want float64
	for j := range 4 {
		cov.SetSym(j, j, unc[j]*unc[j])
		p := (est[j] - ref[j]) / unc[j]
		want += p * p
	}
	for _, v := range []mat.Symmetric{cov, nil} {
		c, err := Compare(ref, est, unc, v, det, nil, 0)
		if err != nil {
			t.Fatal(err)
		}
		if c.NDF != 4 || c.Bins != 4 || math.Abs(c.Chi2-want) > 1e-12*want || c.Diagonal != (v == nil) {
			t.Errorf("cov %v: chi2 %v ndf %d bins %d, want %v and 4", v != nil, c.Chi2, c.NDF, c.Bins, want)
		}
		// Condition number of diag(25, 100, 225, 400): 400/25 (closed form).
		if math.Abs(c.Condition-16) > 1e-12 {
			t.Errorf("condition %v, want 16", c.Condition)
		}
		if p := c.Rows[2].Pull; math.Abs(p-2) > 1e-15 {
			t.Errorf("pull %v, want 2", p)
		}
		if !math.IsNaN(c.Rows[4].Pull) || c.Rows[4].Determined {
			t.Errorf("undetermined bin: %+v", c.Rows[4])
		}
	}
	// A 2×2 block [[a, c], [c, b]] of full rank: the inverse is
	// [[b, −c], [−c, a]]/(ab − c²) (textbook algebra).
	a, b, cc := 4.0, 9.0, 3.0
	v := mat.NewSymDense(2, []float64{a, cc, cc, b})
	d0, d1 := 1.5, -2.0
	c, err := Compare([]float64{0, 0}, []float64{d0, d1}, []float64{2, 3}, v, nil, nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	if want := (b*d0*d0 - 2*cc*d0*d1 + a*d1*d1) / (a*b - cc*cc); c.NDF != 2 || math.Abs(c.Chi2-want) > 1e-12*want {
		t.Errorf("2x2: chi2 %v ndf %d, want %v and 2", c.Chi2, c.NDF, want)
	}
}

// A rank-deficient 2×2 covariance V = s² u uᵀ with u = (1, 1)/√2 (fully
// correlated bins of equal variance s²/2): the pseudo-inverse keeps one
// direction, so ndf is 1 and the chi-square is (uᵀd)²/s² = (d0 + d1)²/(2s²)
// (closed form; method.md §19). A difference along the null direction
// (1, −1) adds nothing.
func TestCompareRankDeficient(t *testing.T) {
	s2 := 8.0
	v := mat.NewSymDense(2, []float64{s2 / 2, s2 / 2, s2 / 2, s2 / 2})
	for _, d := range [][2]float64{{1, 2}, {3, -3}, {-1, 4}} {
		c, err := Compare([]float64{10, 10}, []float64{10 + d[0], 10 + d[1]}, []float64{2, 2}, v, nil, nil, 0)
		if err != nil {
			t.Fatal(err)
		}
		want := (d[0] + d[1]) * (d[0] + d[1]) / (2 * s2)
		if c.NDF != 1 || math.Abs(c.Chi2-want) > 1e-12*math.Max(1, want) {
			t.Errorf("d %v: chi2 %v ndf %d, want %v and 1", d, c.Chi2, c.NDF, want)
		}
		if !math.IsInf(c.Condition, 1) && c.Condition < 1e12 {
			t.Errorf("condition %v of a singular matrix", c.Condition)
		}
	}
	// A negative eigenvalue beyond the cut is not a covariance.
	bad := mat.NewSymDense(2, []float64{1, 2, 2, 1})
	if _, err := Compare([]float64{0, 0}, []float64{1, 1}, []float64{1, 1}, bad, nil, nil, 0); err == nil {
		t.Error("a matrix with eigenvalue -1 was accepted as a covariance")
	}
	if _, err := Compare([]float64{0}, []float64{1, 1}, nil, nil, nil, nil, 0); err == nil {
		t.Error("a short reference was accepted")
	}
}

// The cut is relative to the largest eigenvalue: diag(1, 1e-9) keeps
// both directions with a cut of 1e-10 and one with 1e-8 (method.md §19).
func TestCompareCutIsRelative(t *testing.T) {
	v := mat.NewSymDense(2, []float64{1, 0, 0, 1e-9})
	ref, est, unc := []float64{0, 0}, []float64{1, 1e-4}, []float64{1, math.Sqrt(1e-9)}
	c, err := Compare(ref, est, unc, v, nil, nil, 1e-10)
	if err != nil {
		t.Fatal(err)
	}
	if want := 1 + 1e-8/1e-9; c.NDF != 2 || math.Abs(c.Chi2-want) > 1e-9*want {
		t.Errorf("cut 1e-10: chi2 %v ndf %d, want %v and 2", c.Chi2, c.NDF, want)
	}
	c, err = Compare(ref, est, unc, v, nil, nil, 1e-8)
	if err != nil {
		t.Fatal(err)
	}
	if c.NDF != 1 || math.Abs(c.Chi2-1) > 1e-12 {
		t.Errorf("cut 1e-8: chi2 %v ndf %d, want 1 and 1", c.Chi2, c.NDF)
	}
}
