package validate

import (
	"context"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs/observable"
	"gonum.org/v1/gonum/mat"
)

// The reweighted toy truth is t_j = w_j G_j · Σ_i(n_i − b_i) / Σ_j eps_j
// w_j G_j, its fold then carrying the data's net count (common practice
// for a stress test at the data's statistics), computed here by hand
// with eps_j = Σ_i A_ij / G_j.
func TestReweighted(t *testing.T) {
	p, a := band(t, 6)
	for i := range p.Data {
		p.Data[i] *= 0.1
	}
	w := []float64{0.5, 1, 1.5, 2, 2.5, 3}
	got, err := Reweighted(p, w)
	if err != nil {
		t.Fatal(err)
	}
	var net, fold float64
	for i := range p.Data {
		net += p.Data[i]
	}
	for j := range w {
		fold += mat.Sum(a.ColView(j)) / p.Generated[j] * w[j] * p.Generated[j]
	}
	for j := range w {
		if want := w[j] * p.Generated[j] * net / fold; math.Abs(got[j]-want) > 1e-12*want {
			t.Errorf("bin %d: %v, want %v", j, got[j], want)
		}
	}
	if _, err := Reweighted(p, []float64{1, -1, 1, 1, 1, 1}); err == nil || !strings.Contains(err.Error(), "truth bin 1") {
		t.Errorf("a negative weight: %v", err)
	}
}

// Weights evaluates the expression at the bin centres along each axis
// it uses; flow bins take the nearest in-range edge, and bins of a
// region without the axis weigh 1.
func TestWeights(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: a
    axes:
      - {name: x, edges: [0, 2, 4], underflow: true}
      - {name: y, edges: [0, 1]}
  - name: b
    axes:
      - {name: y, edges: [0, 1, 2]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	x := observable.MustCompile("1 + x*y", s.AxisNames())
	w, err := Weights(s, x)
	if err != nil {
		t.Fatal(err)
	}
	for g := range s.Len() {
		b := s.Bin(g)
		want := 1.0
		if b.RegionName == "a" {
			cx, cy := 0.0, 0.5 // the underflow bin of x at the edge 0
			if xi := slices.Index(b.Axes, "x"); !math.IsInf(b.Low[xi], -1) {
				cx = (b.Low[xi] + b.High[xi]) / 2
			}
			want = 1 + cx*cy
		}
		if w[g] != want {
			t.Errorf("bin %d (%s): %v, want %v", g, s.Label(g), w[g], want)
		}
	}
	if _, err := Weights(s, observable.MustCompile("x - 3", s.AxisNames())); err == nil || !strings.Contains(err.Error(), "is -2 at truth bin 0") {
		t.Errorf("negative weight: %v", err)
	}
}

// With TruthFromResult the toys are drawn from the nominal result: the
// report's truth is the estimate of a separate unfolding of the data.
func TestTruthFromResult(t *testing.T) {
	p, _ := band(t, 8)
	for i := range p.Data {
		p.Data[i] = math.Round(p.Data[i] * 0.01 * (1 + 0.05*float64(i)))
	}
	ctx := context.Background()
	r, err := Validate(ctx, p, nil, &Options{Method: iterations, Nominal: iterations(3), MaxK: 2, Toys: 10, Seed: 2, TruthFromResult: true})
	if err != nil {
		t.Fatal(err)
	}
	ref, err := unfold.Unfold(ctx, p, nil, iterations(3))
	if err != nil {
		t.Fatal(err)
	}
	if r.TruthSource != "result" || !slices.Equal(r.Truth, ref.Estimate) || !slices.Equal(r.Nominal.Estimate, ref.Estimate) {
		t.Errorf("truth %s %v, the result %v", r.TruthSource, r.Truth, ref.Estimate)
	}
}
