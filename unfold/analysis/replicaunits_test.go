package analysis

import (
	"context"
	"math"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// The ensembles of the bootstrap replica units are the same bits whether
// the units are computed together in one pass over the events, one unit
// at a time (as the shards of a plan compute them), or with a memory
// limit that fills one replica per pass; and merged in order they give
// the mean of the replicas' estimates, which a plain loop over the
// replicas (Analysis.Replicas of one replica each) recomputes (the mean
// of Welford's update and of the merge of Chan, Golub and LeVeque,
// STAN-CS-79-773, 1979, equal the plain mean to rounding).
func TestReplicaUnits(t *testing.T) {
	a := variationAnalysis(t, 0, "")
	a.Uncertainty.Replicas = 2*ReplicaUnit + 7
	ctx := context.Background()
	n, err := a.Nominal(ctx, nil)
	if err != nil {
		t.Fatal(err)
	}
	nu := n.ReplicaUnits()
	if nu != 3 {
		t.Fatalf("%d units of %d replicas", nu, a.Uncertainty.Replicas)
	}
	all, err := n.Replicas(ctx, 0, nu)
	if err != nil {
		t.Fatal(err)
	}
	same := func(what string, x, y *unfold.Ensemble) {
		t.Helper()
		if x.N != y.N || !slices.Equal(bits(x.Mean), bits(y.Mean)) || !slices.Equal(bits(x.M2), bits(y.M2)) {
			t.Errorf("%s: the ensembles differ (N %d and %d)", what, x.N, y.N)
		}
	}
	for u := range nu {
		one, err := n.Replicas(ctx, u, u+1)
		if err != nil {
			t.Fatal(err)
		}
		same("unit alone", all[u].Estimate, one[0].Estimate)
	}
	n.s.MemoryLimit = 1 // one replica per pass over the events
	small, err := n.Replicas(ctx, 0, nu)
	if err != nil {
		t.Fatal(err)
	}
	for u := range nu {
		same("one replica per pass", all[u].Estimate, small[u].Estimate)
	}
	merged := unfold.NewEnsemble(all[0].Estimate.Len(), all[0].Estimate.Full)
	for _, e := range all {
		merged.Merge(e.Estimate)
	}
	mean := make([]float64, merged.Len())
	for r := range a.Uncertainty.Replicas {
		e, _, err := a.Replicas(ctx, n.out.Response, n.out.Problem, n.s, n.m, r, r+1, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		for j, x := range e.Mean {
			mean[j] += x / float64(a.Uncertainty.Replicas)
		}
	}
	for j := range mean {
		if d := math.Abs(mean[j] - merged.Mean[j]); d > 1e-12*math.Max(1, math.Abs(mean[j])) {
			t.Errorf("bin %d: mean of the merged units %v, of the replicas %v", j, merged.Mean[j], mean[j])
		}
	}
}

func bits(v []float64) []uint64 {
	b := make([]uint64, len(v))
	for i, x := range v {
		b[i] = math.Float64bits(x)
	}
	return b
}
