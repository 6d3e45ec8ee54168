package unfold

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestShiftSourceOuterProduct checks a single variation's source
// against the closed form of method.md §21 Systematic variations: shift
// = varied − nominal, variance = shift², covariance = shift shiftᵀ.
func TestShiftSourceOuterProduct(t *testing.T) {
	nom := []float64{10, 20, 30, 40}
	var1 := []float64{11, 18, 30, 44.5}
	det := []bool{true, true, true, false}
	s := ShiftSource("model", nom, var1, det, true)
	want := []float64{1, -2, 0, 0} // the undetermined bin has no shift
	if s.Name != "model" || s.Method != MethodShift || s.Up != nil || s.Down != nil {
		t.Fatalf("source %+v", s)
	}
	for i := range want {
		if s.Shift[i] != want[i] || s.Variance[i] != want[i]*want[i] {
			t.Errorf("bin %d: shift %v variance %v, want %v and %v", i, s.Shift[i], s.Variance[i], want[i], want[i]*want[i])
		}
		for j := range want {
			// method.md §21: V_ij = δ_i δ_j.
			if got := s.Covariance.At(i, j); got != want[i]*want[j] {
				t.Errorf("cov[%d][%d] = %v, want %v", i, j, got, want[i]*want[j])
			}
		}
	}
	if d := ShiftSource("x", nom, var1, nil, false); d.Covariance != nil || d.Shift[3] != 4.5 {
		t.Errorf("without covariance or determined flags: %+v", d)
	}
}

// TestPairSourceHalfDifference checks the symmetrised pair of method.md
// §21 Systematic variations: δ = (up − down)/2 with the sign of the up
// variation, the covariance the outer product δ δᵀ, and the one-sided
// shifts kept.
func TestPairSourceHalfDifference(t *testing.T) {
	nom := []float64{100, 50, 10}
	up := []float64{104, 47, 10.5}
	down := []float64{98, 52, 9}
	s := PairSource("energy-scale", nom, up, down, nil, true)
	if s.Method != MethodHalfDifference {
		t.Fatalf("method %q", s.Method)
	}
	for i := range nom {
		d := (up[i] - down[i]) / 2
		if s.Shift[i] != d || s.Variance[i] != d*d || s.Up[i] != up[i]-nom[i] || s.Down[i] != down[i]-nom[i] {
			t.Errorf("bin %d: shift %v (want %v), variance %v, up %v, down %v", i, s.Shift[i], d, s.Variance[i], s.Up[i], s.Down[i])
		}
		for j := range nom {
			dj := (up[j] - down[j]) / 2
			if got := s.Covariance.At(i, j); math.Abs(got-d*dj) > 1e-15*math.Abs(d*dj) {
				t.Errorf("cov[%d][%d] = %v, want %v", i, j, got, d*dj)
			}
		}
	}
	// The sign convention: the first bin rises with the up variation.
	if !(s.Shift[0] > 0 && s.Shift[1] < 0) {
		t.Errorf("sign of the shifts %v", s.Shift)
	}
	// A fully correlated source: the correlation of any two bins with
	// a shift is ±1 (method.md §21).
	for i := range nom {
		for j := range nom {
			r := s.Covariance.At(i, j) / math.Sqrt(s.Variance[i]*s.Variance[j])
			if math.Abs(math.Abs(r)-1) > 1e-12 {
				t.Errorf("correlation[%d][%d] = %v, want ±1", i, j, r)
			}
		}
	}
}

// TestShiftSourcesAdd checks that the total of a data source and two
// shift sources is their sum (method.md §18 Sources of uncertainty and
// their total): the covariance summed element by element, the
// uncertainty the root of the summed variances.
func TestShiftSourcesAdd(t *testing.T) {
	r := &Result{Estimate: []float64{5, 6, 7}, Determined: []bool{true, true, true}}
	data := mat.NewSymDense(3, []float64{4, 1, 0, 1, 9, 2, 0, 2, 16})
	r.AddSource(Source{Name: SourceData, Variance: []float64{4, 9, 16}, Covariance: data})
	a := ShiftSource("a", r.Estimate, []float64{6, 6, 5}, nil, true)
	b := PairSource("b", r.Estimate, []float64{5.5, 7, 7}, []float64{4.5, 5, 7}, nil, true)
	r.AddSource(a)
	r.AddSource(b)
	da, db := []float64{1, 0, -2}, []float64{0.5, 1, 0}
	want := [][]float64{{4, 1, 0}, {1, 9, 2}, {0, 2, 16}}
	for i := range 3 {
		for j := range 3 {
			w := want[i][j] + da[i]*da[j] + db[i]*db[j]
			if got := r.Covariance.At(i, j); math.Abs(got-w) > 1e-14 {
				t.Errorf("total cov[%d][%d] = %v, want %v", i, j, got, w)
			}
		}
		w := math.Sqrt(want[i][i] + da[i]*da[i] + db[i]*db[i])
		if math.Abs(r.Uncertainty[i]-w) > 1e-14 {
			t.Errorf("total uncertainty[%d] = %v, want %v", i, r.Uncertainty[i], w)
		}
	}
}

// TestCheckSourceCovariances checks the refusal of dense source
// covariances above the memory limit: 8 bytes per element of one
// nt × nt matrix per source and one for the total.
func TestCheckSourceCovariances(t *testing.T) {
	if err := CheckSourceCovariances(100, 120, 3, 8*100*100*4); err != nil {
		t.Errorf("at the limit: %v", err)
	}
	err := CheckSourceCovariances(100, 120, 3, 8*100*100*4-1)
	var tl *TooLargeError
	if !errors.As(err, &tl) || tl.Bytes != 8*100*100*4 {
		t.Fatalf("above the limit: %v", err)
	}
	if msg := err.Error(); !strings.Contains(msg, "100 truth × 120 reco bins") || !strings.Contains(msg, "3 systematic sources") {
		t.Errorf("message %q", msg)
	}
}
