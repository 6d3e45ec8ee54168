package validate

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"gonum.org/v1/gonum/mat"
)

// band is a problem of nt bins, each truth bin migrating to its reco bin
// (0.5) and its neighbours (0.2 each), efficiency 0.9, with falling
// generated counts.
func band(t *testing.T, nt int) (*unfold.Problem, *mat.Dense) {
	a := mat.NewDense(nt, nt, nil)
	gen := make([]float64, nt)
	for j := range nt {
		gen[j] = 2e4 * math.Exp(-2*float64(j)/float64(nt))
		for i, w := range map[int]float64{j - 1: 0.2, j: 0.5, j + 1: 0.2} {
			if i >= 0 && i < nt {
				a.Set(i, j, 0.9*w*gen[j])
			}
		}
	}
	return denseProblem(t, a, gen), a
}

// TestClosure: the simulation's own reco spectrum unfolded with the
// simulation's prior starts at the fixed point μ = G of the iteration
// (method.md §7 Exact properties of the iteration), so the truth comes
// back to rounding; fluctuated at the data's statistics, Σ pull² over
// ndf bins has mean ndf and, for independent bins, standard deviation
// sqrt(2 ndf) (common practice; checked within 3 of those).
func TestClosure(t *testing.T) {
	p, _ := band(t, 100)
	for i := range p.Data {
		p.Data[i] *= 0.05 // data of lower statistics than the simulation
	}
	ctx := context.Background()
	c, err := Closure(ctx, p, nil, iterations(4), false, 0)
	if err != nil {
		t.Fatal(err)
	}
	if c.MaxRelDeviation > 1e-12 || c.MaxPull > 1e-9 {
		t.Errorf("closure without fluctuations: largest relative deviation %v, largest pull %v", c.MaxRelDeviation, c.MaxPull)
	}
	f, err := Closure(ctx, p, nil, iterations(4), true, 8)
	if err != nil {
		t.Fatal(err)
	}
	if n := float64(f.NDF); f.NDF != 100 || math.Abs(f.Chi2-n) > 3*math.Sqrt(2*n) {
		t.Errorf("fluctuated closure: chi2 %v for %d bins", f.Chi2, f.NDF)
	}
	if math.Abs(f.Truth[0]-0.05*p.Generated[0]) > 1e-9*f.Truth[0] {
		t.Errorf("fluctuated closure truth %v, want the generated count at the data's statistics %v", f.Truth[0], 0.05*p.Generated[0])
	}
}

// TestStress: the reweighted truth folded without fluctuations and
// unfolded agrees with the dense iteration of D'Agostini's formulas
// (method.md §3 The iteration) on the same data, and the bias is that
// estimate minus the reweighted truth.
func TestStress(t *testing.T) {
	p, a := band(t, 12)
	nt := len(p.Generated)
	w := make([]float64, nt)
	for j := range w {
		w[j] = 1 + 0.3*(2*float64(j)/float64(nt-1)-1)
	}
	ctx := context.Background()
	nominal, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Diagonal}, iterations(3))
	if err != nil {
		t.Fatal(err)
	}
	c, err := Stress(ctx, p, nil, iterations(3), "tilt", w, nominal)
	if err != nil {
		t.Fatal(err)
	}
	r := mat.NewDense(nt, nt, nil)
	for j := range nt {
		for i := range nt {
			r.Set(i, j, a.At(i, j)/p.Generated[j])
		}
	}
	data := make([]float64, nt)
	for i := range nt {
		for j := range nt {
			data[i] += r.At(i, j) * c.Truth[j]
		}
	}
	ref := denseIteration(r, data, p.Generated, 3)
	for j := range nt {
		if math.Abs(c.Estimate[j]-ref[j]) > 1e-9*ref[j] || math.Abs(c.Bias[j]-(ref[j]-c.Truth[j])) > 1e-9*ref[j] {
			t.Errorf("bin %d: estimate %v bias %v, dense iteration %v bias %v", j, c.Estimate[j], c.Bias[j], ref[j], ref[j]-c.Truth[j])
		}
		if d := c.Nominal.Difference[j] - (ref[j] - nominal.Estimate[j]); math.Abs(d) > 1e-9*ref[j] {
			t.Errorf("bin %d: difference to the nominal result %v, want %v", j, c.Nominal.Difference[j], ref[j]-nominal.Estimate[j])
		}
	}
	if c.Chi2 <= 0 || c.Nominal.Chi2 <= 0 {
		t.Errorf("chi2 %v, against the nominal %v", c.Chi2, c.Nominal.Chi2)
	}
}

// TestTilt: the weights of a linear tilt on edges 0, 1, 2, 4 with flow
// bins (closed form: w = 1 + p(2x/4 − 1) at the centres x = 0.5, 1.5, 3;
// the flow bins take the edge values 1 ∓ p).
func TestTilt(t *testing.T) {
	ax, err := binning.NewAxis("x", "", []float64{0, 1, 2, 4}, true, true)
	if err != nil {
		t.Fatal(err)
	}
	reg, err := binning.NewRegion("all", ax)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(reg)
	if err != nil {
		t.Fatal(err)
	}
	w, err := Tilt(s, "x", 20)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{1 + 0.2*(0.25-1), 1 + 0.2*(0.75-1), 1 + 0.2*(1.5-1), 0.8, 1.2}
	for g := range want {
		if math.Abs(w[g]-want[g]) > 1e-15 {
			t.Errorf("bin %d (%s): weight %v, want %v", g, s.Label(g), w[g], want[g])
		}
	}
	if _, err := Tilt(s, "y", 20); err == nil {
		t.Error("a tilt along a missing axis was accepted")
	}
	if _, err := Tilt(s, "x", 100); err == nil {
		t.Error("a tilt of 100% was accepted")
	}
}
