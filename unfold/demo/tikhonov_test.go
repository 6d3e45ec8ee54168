package demo_test

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/demo"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
)

// On the demo, the Tikhonov result with the L-curve tau and the
// iterative result agree within their uncertainties in most in-range
// bins: |μ_T − μ_B| ≤ sqrt(σ_T² + σ_B²) (a loose check, common practice
// for a cross-check of two methods: the two estimates are strongly
// correlated, being from the same data, so this is generous; the
// differences are the two regularisations' biases). The test requires
// at least two thirds of the bins and prints them side by side with -v:
//
//	go test ./unfold/demo -run TikhonovAgrees -v
func TestDemoTikhonovAgreesWithIterative(t *testing.T) {
	in := generateOnce(t, demo.Config{Events: testEvents, Seed: demo.DefaultSeed})
	p := load(t, in.Path(demo.AnalysisFile))
	bay := p.unfold(t, nil)
	s, _, err := p.a.Settings()
	if err != nil {
		t.Fatal(err)
	}
	tk, err := unfold.Unfold(context.Background(), p.problem, s, &tikhonov.Settings{Truth: p.a.Truth})
	if err != nil {
		t.Fatal(err)
	}
	d := tikhonov.DetailsOf(tk)
	t.Logf("tikhonov: tau = %.4g (%s, at scan edge %v, %d penalty rows, %s solver)", d.Tau, d.Criterion, d.AtScanEdge, d.PenaltyRows, d.Solver)
	t.Logf("%4s  %-34s %10s %14s %14s %8s", "bin", "label", "truth", "iterative", "tikhonov", "diff/σ")
	n := p.a.Truth.InRange()
	agree := 0
	for g := range n {
		diff := tk.Estimate[g] - bay.Estimate[g]
		sd := math.Hypot(tk.Uncertainty[g], bay.Uncertainty[g])
		if math.Abs(diff) <= sd {
			agree++
		}
		t.Logf("%4d  %-34s %10.1f %8.1f±%-5.1f %8.1f±%-5.1f %8.2f", g, p.a.Truth.Label(g), in.Truth.Expected[g], bay.Estimate[g], bay.Uncertainty[g], tk.Estimate[g], tk.Uncertainty[g], diff/sd)
	}
	t.Logf("%d of %d in-range bins agree within the combined uncertainty", agree, n)
	if 3*agree < 2*n {
		t.Errorf("only %d of %d in-range bins agree within the combined uncertainty", agree, n)
	}
}
