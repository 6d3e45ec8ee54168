package demo

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Compare's chi-square is the quadratic form dᵀ V⁻¹ d. Checked against
// two closed forms: a diagonal V gives the sum of squared pulls, and for
// a 2×2 block [[a, c], [c, b]] the inverse is [[b, −c], [−c, a]]/(ab − c²)
// (textbook algebra).
func TestCompareChi2(t *testing.T) {
	s := TruthScheme()
	n, nin := s.Len(), s.InRange()
	tr := &Truth{Scheme: s, Expected: make([]float64, n)}
	est := make([]float64, n)
	unc := make([]float64, n)
	cov := mat.NewSymDense(n, nil)
	var want float64
	for g := range n {
		tr.Expected[g] = 100 + float64(g)
		est[g] = tr.Expected[g] + float64(g%5) - 2
		unc[g] = 1 + 0.1*float64(g)
		cov.SetSym(g, g, unc[g]*unc[g])
		if g < nin {
			p := (est[g] - tr.Expected[g]) / unc[g]
			want += p * p
		}
	}
	// Flow bins must not count: give them huge deviations.
	for g := nin; g < n; g++ {
		est[g] += 1e6
	}
	c, err := Compare(tr, est, unc, cov)
	if err != nil {
		t.Fatal(err)
	}
	if c.NDF != nin || math.Abs(c.Chi2-want) > 1e-12*want {
		t.Errorf("diagonal: chi2 %v ndf %d, want %v and %d", c.Chi2, c.NDF, want, nin)
	}
	if p := c.Rows[3].Pull; math.Abs(p-(est[3]-tr.Expected[3])/unc[3]) > 1e-15 {
		t.Errorf("pull %v", p)
	}
	// Correlate bins 0 and 1.
	a, b, cc := cov.At(0, 0), cov.At(1, 1), 0.6*math.Sqrt(cov.At(0, 0)*cov.At(1, 1))
	cov.SetSym(0, 1, cc)
	d0, d1 := est[0]-tr.Expected[0], est[1]-tr.Expected[1]
	want2 := want - d0*d0/a - d1*d1/b + (b*d0*d0-2*cc*d0*d1+a*d1*d1)/(a*b-cc*cc)
	c, err = Compare(tr, est, unc, cov)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(c.Chi2-want2) > 1e-12*want2 {
		t.Errorf("correlated: chi2 %v, want %v", c.Chi2, want2)
	}
	if c.PValue <= 0 || c.PValue >= 1 {
		t.Errorf("p-value %v", c.PValue)
	}
	cov.SetSym(0, 1, 2*math.Sqrt(a*b))
	if _, err := Compare(tr, est, unc, cov); err == nil {
		t.Error("a covariance that is not positive definite was accepted")
	}
	if _, err := Compare(tr, est[:3], unc, cov); err == nil {
		t.Error("a short estimate was accepted")
	}
	if _, err := Compare(tr, est, unc[:3], nil); err == nil {
		t.Error("short uncertainties were accepted")
	}
	if _, err := Compare(tr, est, unc, mat.NewSymDense(nin, nil)); err == nil {
		t.Error("a covariance of the in-range bins only was accepted")
	}
}
