package bayes

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// The χ² and the change between iterations are summed inside the sweep
// (the column hook of sparse.SweepHooks), each chunk by the hook that
// finishes the last column block it overlaps, whether it lies within one
// block or straddles several. Against an
// independent computation from the kept estimates of every step: χ²(k) =
// Σ_j eps_j (μ_j(k) − μ_j(k−1))² / μ_j(k) over μ_j(k) > 0 and the change
// Σ_j |μ_j(k) − μ_j(k−1)| / Σ_j μ_j(k) (method.md §5 Stopping), summed
// here in chunks of 2^15 bins added in order, the order the iteration
// promises whatever the partition: the same bits; and to rounding against
// one plain sum over all bins. The matrix is large enough for blocks both
// wider and narrower than a chunk.
func TestFusedChi2MatchesFormula(t *testing.T) {
	if testing.Short() {
		t.Skip("a 600,000-bin problem")
	}
	ctx := context.Background()
	p := randomProblem(t, 17, 600_000, 900_000, 2, true)
	if nb := len(p.Migrations.ColRanges()) - 1; nb < 8 {
		t.Fatalf("%d column blocks: the test needs several", nb)
	}
	res, err := unfold.Unfold(ctx, p, nil, &Settings{Iterations: 3, Scan: true})
	if err != nil {
		t.Fatal(err)
	}
	steps := res.StepEstimates
	if len(steps) == 0 {
		t.Fatal("no kept estimates")
	}
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	eps := pr.Efficiency()
	hist := DetailsOf(res).History
	u, err := NewUnfolder(pr, &Settings{Iterations: 3})
	if err != nil {
		t.Fatal(err)
	}
	d, err := u.Unfold(ctx, make([]float64, pr.TruthBins()), nil)
	if err != nil {
		t.Fatal(err)
	}
	for k := 1; k < len(hist); k++ {
		prev, cur := steps[k-1], steps[k]
		const cl = 1 << 15
		var s, plain [3]float64
		for lo := 0; lo < len(cur); lo += cl {
			var c [3]float64
			for j := lo; j < min(len(cur), lo+cl); j++ {
				dx := cur[j] - prev[j]
				if cur[j] > 0 {
					c[0] += eps[j] * dx * dx / cur[j]
					plain[0] += eps[j] * dx * dx / cur[j]
				}
				c[1] += math.Abs(dx)
				c[2] += cur[j]
				plain[1] += math.Abs(dx)
				plain[2] += cur[j]
			}
			for i := range s {
				s[i] += c[i]
			}
		}
		if hist[k].Chi2 != s[0] || hist[k].Change != s[1]/s[2] {
			t.Fatalf("step %d: χ² %v change %v, the chunked sums give %v %v", k, hist[k].Chi2, hist[k].Change, s[0], s[1]/s[2])
		}
		if math.Abs(hist[k].Chi2-plain[0]) > 1e-9*plain[0] || math.Abs(hist[k].Change-plain[1]/plain[2]) > 1e-9*hist[k].Change {
			t.Fatalf("step %d: χ² %v change %v, one plain sum gives %v %v", k, hist[k].Chi2, hist[k].Change, plain[0], plain[1]/plain[2])
		}
		if d.History[k] != hist[k] {
			t.Fatalf("step %d: the Unfolder gives %+v, Unfold %+v", k, d.History[k], hist[k])
		}
	}
}
