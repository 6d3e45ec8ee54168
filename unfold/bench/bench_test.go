package bench

import (
	"context"
	"testing"
	"time"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// The small problem has the documented shape: 20×20×20 truth and
// 20×20×40 reco bins, at most 20 migrations per truth bin, efficiencies
// in [0.6, 0.95] (below one), a background, and data that Prepare
// accepts.
func TestSmallProblem(t *testing.T) {
	c, err := ConfigOf(Small)
	if err != nil {
		t.Fatal(err)
	}
	p, err := Problem(c)
	if err != nil {
		t.Fatal(err)
	}
	nr, nt := p.Migrations.Dims()
	if nt != 8000 || nr != 16000 {
		t.Fatalf("%d truth × %d reco bins, want 8000 × 16000", nt, nr)
	}
	if nnz := p.Migrations.NNZ(); nnz > 20*nt || nnz < 15*nt {
		t.Errorf("%d non-zeros for %d truth bins, want about 20 each", nnz, nt)
	}
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	for j, e := range pr.Efficiency() {
		if e < 0.6-1e-12 || e > 0.95+1e-12 {
			t.Fatalf("efficiency of truth bin %d is %v, want [0.6, 0.95]", j, e)
		}
	}
	if pr.Background() == nil {
		t.Error("no background (fakes) in the model")
	}
	if _, err := ConfigOf("huge"); err == nil {
		t.Error("an unknown size was accepted")
	}
}

// BenchmarkFillParquet runs the Parquet filling of the fine binnings
// with 2^21 events: the decoding alone and the whole filling, in one
// round per iteration (for profiling the filling path).
func BenchmarkFillParquet(b *testing.B) {
	c, err := ConfigOf(Fine)
	if err != nil {
		b.Fatal(err)
	}
	c.ParquetEvents, c.ParquetRounds = 2<<20, 1
	for range b.N {
		var r Results
		if err := fillParquet(b.Context(), &r, c); err != nil {
			b.Fatal(err)
		}
		b.ReportMetric(r.ParquetEventsPerS/1e6, "Mfill/s")
		b.ReportMetric(r.ParquetDecodeEventsPerS/1e6, "Mdecode/s")
		b.ReportMetric(r.ParquetDecodeRatio, "ratio")
		b.ReportMetric(r.ParquetEventsPerCPUS/1e6, "Mfill/cpu-s")
		b.ReportMetric(r.ParquetDecodeEventsPerCPUS/1e6, "Mdecode/cpu-s")
		b.ReportMetric(r.ParquetDecodeCPURatio, "cpu-ratio")
	}
}

// BenchmarkFullCovariance: the full linearised covariance of the
// iterative method (the Jacobian recursion, then J diag(var) Jᵀ), 4
// iterations, on the family's problem of 5,000 truth × 10,000 reco bins
// (truth 25×20×10, reco 25×20×20). Reports the median of the whole
// Unfold calls as s/op-median.
func BenchmarkFullCovariance(b *testing.B) {
	c := Config{Truth: [3]int{25, 20, 10}, Reco: [3]int{25, 20, 20}}
	p, err := Problem(c)
	if err != nil {
		b.Fatal(err)
	}
	s := &unfold.Settings{Covariance: unfold.Full}
	m := &bayes.Settings{Iterations: 4}
	var d []time.Duration
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		if _, err := unfold.Unfold(context.Background(), p, s, m); err != nil {
			b.Fatal(err)
		}
		d = append(d, time.Since(t0))
	}
	b.ReportMetric(median(d).Seconds(), "s/op-median")
}
