package validate

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat"
)

// TestMomentsMerge: Welford's update and Chan, Golub and LeVeque's merge
// agree with the two-pass mean and variance of gonum's stat package.
func TestMomentsMerge(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	x := make([]float64, 1000)
	for i := range x {
		x[i] = 1e3 + rng.NormFloat64()*3
	}
	var parts [3]Moments
	for p := range parts {
		parts[p] = newMoments(1)
	}
	for i, v := range x {
		parts[min(i/300, 2)].add(0, v)
	}
	m := newMoments(1)
	for p := range parts {
		m.merge(&parts[p])
	}
	mean, vr := stat.MeanVariance(x, nil)
	if m.N[0] != 1000 || math.Abs(m.Mean[0]-mean) > 1e-12*mean || math.Abs(m.variance(0)-vr) > 1e-10*vr {
		t.Errorf("merged n=%v mean=%v var=%v, want 1000, %v, %v", m.N[0], m.Mean[0], m.variance(0), mean, vr)
	}
}
