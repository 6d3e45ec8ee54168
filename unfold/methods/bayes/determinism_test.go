package bayes

import (
	"github.com/desmear/desmear/unfold"
	"runtime"
	"testing"
)

// Same inputs and seed give the same bits whatever the number of cores
// (fixed chunking and accumulation orders; seeded streams per probe and
// toy). The sizes exceed the chunk length of the element-wise passes and
// the column block of the dense Jacobian, so the parallel paths run.
func TestDeterministicAcrossCores(t *testing.T) {
	big := randomProblem(t, 3, 30000, 70000, 8, true)
	big.BackgroundVariance = big.Background
	mid := randomProblem(t, 5, 600, 1300, 9, true)
	runs := []struct {
		p *unfold.Problem
		s opts
	}{
		{big, opts{Iterations: 3, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 3, Seed: 5}},
		{big, opts{StopChi2: 1e-3, MaxIterations: 4, Smoothing: &Smoothing{Neighbours: chainScheme(t, 30000)}}},
		{mid, opts{Iterations: 3, Covariance: unfold.Full}},
		{mid, opts{Iterations: 3, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 5, Seed: 9}},
	}
	old := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(old)
	for k, r := range runs {
		runtime.GOMAXPROCS(1)
		a := unfoldOrFail(t, r.p, &r.s)
		runtime.GOMAXPROCS(2)
		b := unfoldOrFail(t, r.p, &r.s)
		same := func(what string, x, y []float64) {
			for i := range x {
				if x[i] != y[i] {
					t.Errorf("run %d: %s[%d] differs: %v with 1 core, %v with 2", k, what, i, x[i], y[i])
					return
				}
			}
		}
		same("estimate", a.Estimate, b.Estimate)
		same("folded", a.Folded, b.Folded)
		same("uncertainty", a.Uncertainty, b.Uncertainty)
		if a.Covariance != nil {
			same("covariance", a.Covariance.RawSymmetric().Data, b.Covariance.RawSymmetric().Data)
		}
		for i := range details(a).History {
			if details(a).History[i] != details(b).History[i] {
				t.Errorf("run %d: history %d differs: %+v, %+v", k, i, details(a).History[i], details(b).History[i])
			}
		}
	}
}
