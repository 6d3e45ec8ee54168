package bayes

import (
	"context"
	"errors"
	"github.com/desmear/desmear/unfold"
	"math"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// Invalid or inconsistent inputs are *InputError values naming the field
// and the bins; invalid settings are *SettingsError values.
func TestInputErrors(t *testing.T) {
	good := func() *unfold.Problem {
		return denseProblem(t, [][]float64{{0.5, 0.1, 0}, {0.2, 0.6, 0}, {0, 0.1, 0}}, []float64{50, 60, 5})
	}
	emptyA, _ := sparse.NewMatrix(3, 3, []int{0, 0, 0, 0}, nil, nil, nil)
	negA, _ := sparse.NewMatrix(2, 1, []int{0, 2}, []int{0, 1}, []float64{1, -0.5}, nil)
	cases := []struct {
		name       string
		edit       func(p *unfold.Problem)
		field      string
		reco, tr   int
		reasonPart string
	}{
		{"no response", func(p *unfold.Problem) { p.Migrations = nil }, "Migrations", -1, -1, "no response"},
		{"empty response", func(p *unfold.Problem) { p.Migrations = emptyA }, "Migrations", -1, -1, "empty"},
		{"negative migration", func(p *unfold.Problem) { p.Migrations = negA; p.Generated = []float64{2}; p.Data = []float64{1, 1} }, "Migrations", 1, 0, "negative"},
		{"generated size", func(p *unfold.Problem) { p.Generated = p.Generated[:2] }, "Generated", -1, -1, "2 entries"},
		{"no generated count", func(p *unfold.Problem) { p.Generated[1] = 0 }, "Generated", -1, 1, "no generated count"},
		{"efficiency above one", func(p *unfold.Problem) { p.Generated[1] = 0.5 }, "Generated", -1, 1, "efficiency > 1"},
		{"data size", func(p *unfold.Problem) { p.Data = p.Data[:1] }, "Data", -1, -1, "1 entries"},
		{"negative data", func(p *unfold.Problem) { p.Data[2] = -1 }, "Data", 2, -1, "≥ 0"},
		{"NaN data", func(p *unfold.Problem) { p.Data[0] = math.NaN() }, "Data", 0, -1, "finite"},
		{"Inf variance", func(p *unfold.Problem) { p.DataVariance = []float64{1, math.Inf(1), 1} }, "DataVariance", 1, -1, "finite"},
		{"negative background", func(p *unfold.Problem) { p.Background = []float64{0, -1, 0} }, "Background", 1, -1, "≥ 0"},
		{"background variance alone", func(p *unfold.Problem) { p.BackgroundVariance = []float64{1, 1, 1} }, "BackgroundVariance", -1, -1, "without a background"},
		{"negative prior", func(p *unfold.Problem) { p.Prior = []float64{1, -1, 1} }, "Prior", -1, 1, "≥ 0"},
		{"zero prior", func(p *unfold.Problem) { p.Prior = []float64{0, 0, 5} }, "Prior", -1, -1, "zero in every"},
		{"unreachable data", func(p *unfold.Problem) {
			a, _ := sparse.NewMatrix(3, 2, []int{0, 1, 2}, []int{0, 1}, []float64{0.5, 0.5}, nil)
			p.Migrations, p.Generated = a, []float64{1, 1}
		}, "Data", 2, -1, "no truth bin reaches"},
		{"nothing to unfold", func(p *unfold.Problem) { p.Background = []float64{100, 100, 100} }, "Data", -1, -1, "nothing to unfold"},
	}
	for _, c := range cases {
		p := good()
		c.edit(p)
		_, err := unfoldWith(context.Background(), p, nil)
		var ie *unfold.InputError
		if !errors.As(err, &ie) {
			t.Errorf("%s: got %v, want an *InputError", c.name, err)
			continue
		}
		if ie.Field != c.field || ie.Reco != c.reco || ie.Truth != c.tr || !strings.Contains(ie.Error(), c.reasonPart) {
			t.Errorf("%s: got %+v (%q), want field %s reco %d truth %d containing %q", c.name, ie, ie.Error(), c.field, c.reco, c.tr, c.reasonPart)
		}
	}

	// A generated count below the reconstructed one by rounding only
	// (relative 1e-12, inside the 1e-9 tolerance) is accepted: weighted
	// sums of the same events may differ in the last bits.
	p0 := good()
	p0.Generated[1] = 0.8 * (1 - 1e-12) // column 1 of A sums to 0.8
	if _, err := unfoldWith(context.Background(), p0, nil); err != nil {
		t.Errorf("generated count below the reconstructed one by rounding: %v", err)
	}

	// A truth bin without migrations and without generated events is
	// simply not determined; its estimate is 0, never NaN.
	p := good()
	res := unfoldOrFail(t, p, &opts{Covariance: unfold.Full})
	if res.Determined[2] || res.Estimate[2] != 0 || res.Uncertainty[2] != 0 || res.Efficiency[2] != 0 {
		t.Errorf("undetermined bin: determined %v estimate %v uncertainty %v", res.Determined[2], res.Estimate[2], res.Uncertainty[2])
	}
	for j := 0; j < 3; j++ {
		if math.IsNaN(res.Covariance.At(2, j)) || res.Covariance.At(2, j) != 0 {
			t.Errorf("covariance of the undetermined bin with %d: %v", j, res.Covariance.At(2, j))
		}
	}

	for _, c := range []struct {
		s     opts
		field string
	}{
		{opts{Iterations: -1}, "Iterations"},
		{opts{Iterations: 3, StopChi2: 1}, "Iterations"},
		{opts{MaxIterations: -1}, "MaxIterations"},
		{opts{StopChi2: math.NaN()}, "StopChi2"},
		{opts{StopChi2: -1}, "StopChi2"},
		{opts{StopChi2: math.Inf(1)}, "StopChi2"},
		{opts{Probes: -1}, "Probes"},
		{opts{Probes: 1}, "Probes"},
		{opts{Toys: -2}, "Toys"},
		{opts{Toys: 1}, "Toys"},
		{opts{MemoryLimit: -1}, "MemoryLimit"},
		{opts{Covariance: 7}, "Covariance"},
		{opts{Covariance: -1}, "Covariance"},
		{opts{Background: 3}, "Background"},
		{opts{DiagonalMethod: 9}, "DiagonalMethod"},
		{opts{Smoothing: &Smoothing{}}, "Smoothing"},
		{opts{Smoothing: &Smoothing{Neighbours: chainScheme(t, 3), Strength: 2}}, "Smoothing"},
		{opts{Smoothing: &Smoothing{Neighbours: chainScheme(t, 3), Strength: -0.5}}, "Smoothing"},
		{opts{Smoothing: &Smoothing{Neighbours: chainScheme(t, 4)}}, "Smoothing"},
		{opts{Smoothing: &Smoothing{Neighbours: badNeighbourhood{n: 3, in: 4}}}, "Smoothing"},
		{opts{Smoothing: &Smoothing{Neighbours: badNeighbourhood{n: 3, in: 3, beyond: true}}}, "Smoothing"},
	} {
		_, err := unfoldWith(context.Background(), good(), &c.s)
		var se *unfold.SettingsError
		if !errors.As(err, &se) || se.Field != c.field {
			t.Errorf("settings %+v: got %v, want a *unfold.SettingsError for %s", c.s, err, c.field)
		}
	}
	// The neighbourhood stand-in is valid when it reports nothing wrong.
	if _, err := unfoldWith(context.Background(), good(), &opts{Smoothing: &Smoothing{Neighbours: badNeighbourhood{n: 3, in: 3}}}); err != nil {
		t.Errorf("valid stand-in neighbourhood: %v", err)
	}
}

// badNeighbourhood is a chain of n truth bins whose first in bins are in
// range; with beyond set, every bin names a next neighbour past the end.
type badNeighbourhood struct {
	n, in  int
	beyond bool
}

func (b badNeighbourhood) Len() int     { return b.n }
func (b badNeighbourhood) InRange() int { return b.in }
func (b badNeighbourhood) NumAxes(int) int {
	return 1
}
func (b badNeighbourhood) Neighbours(g, axis int) (prev, next int) {
	if b.beyond {
		return g - 1, b.n
	}
	prev, next = g-1, g+1
	if next >= b.in {
		next = -1
	}
	return prev, next
}

// Subtract mode clips negative n − b to zero and reports the bins.
func TestSubtractClips(t *testing.T) {
	p := denseProblem(t, oracleDR, oracleDN)
	p.Background = []float64{20, 600, 30, 10}
	res := unfoldOrFail(t, p, &opts{Background: unfold.Subtract})
	if len(res.Clipped) != 1 || res.Clipped[0] != 1 {
		t.Errorf("clipped %v, want [1]", res.Clipped)
	}
	// Equivalent to unfolding n' = max(n − b, 0) without background.
	q := denseProblem(t, oracleDR, []float64{647, 0, 295, 77})
	ref := unfoldOrFail(t, q, nil)
	if d := maxRelDiff(res.Estimate, ref.Estimate); d > 1e-15 {
		t.Errorf("subtract mode differs from unfolding n − b by %g", d)
	}
}

// Cancellation stops the iteration and the uncertainty computations.
func TestCancel(t *testing.T) {
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	p := randomProblem(t, 1, 20, 40, 5, false)
	for _, s := range []opts{{}, {Covariance: unfold.Full}, {Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys}} {
		if _, err := unfoldWith(ctx, p, &s); !errors.Is(err, context.Canceled) {
			t.Errorf("settings %+v: got %v, want context.Canceled", s, err)
		}
	}
}
