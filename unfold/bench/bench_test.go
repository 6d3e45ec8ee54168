package bench

import (
	"context"
	"flag"
	"math"
	"math/rand/v2"
	"path/filepath"
	"runtime"
	"slices"
	"testing"
	"time"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/eventfile"
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

// BenchmarkFillEventFiles builds the response of the fine binnings from
// the events of BenchmarkFillParquet (2^21 of them; edit n for 10 M)
// written as a ROOT, a CSV and a Parquet file, through the analysis as
// `desmear response` does, one filling per iteration, and reports the
// events per CPU-second of the process (for profiling each reader's path).
func BenchmarkFillEventFiles(b *testing.B) {
	c, err := ConfigOf(Fine)
	if err != nil {
		b.Fatal(err)
	}
	n := 2 << 20
	for _, format := range []string{"root", "csv", "parquet"} {
		b.Run(format, func(b *testing.B) {
			dir := b.TempDir()
			names, cols := eventColumns(n)
			sim := filepath.Join(dir, "sim."+format)
			switch format {
			case "root":
				err = eventfile.WriteROOT(sim, "events", names, cols)
			case "csv":
				err = eventfile.WriteCSV(sim, names, cols)
			default:
				err = eventfile.WriteParquet(sim, names, cols)
			}
			if err != nil {
				b.Fatal(err)
			}
			cols = nil
			an, err := parquetAnalysis(dir, sim, c)
			if err != nil {
				b.Fatal(err)
			}
			b.ResetTimer()
			for range b.N {
				c0 := cpuTime()
				built, _, err := an.BuildResponse(b.Context(), nil)
				if err != nil {
					b.Fatal(err)
				}
				if built.Summary.Events != int64(n) {
					b.Fatalf("the response read %d of %d events", built.Summary.Events, n)
				}
				b.ReportMetric(float64(n)/(cpuTime()-c0).Seconds()/1e6, "Mfill/cpu-s")
			}
		})
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

// The whole job's problem at a reduced small size: the generated weight
// of every truth bin is the sum of the weights of its events,
// reconstructed or not, checked against a plain serial loop over the same
// events (batches of 2^18, PCG stream b of seed 0x5eed); the column sums
// of the filled migrations are the reconstructed part, so every
// efficiency lies in [0, 1] (common practice: ε_j = Σ_i A_ij / G_j); the
// data are the rounded row sums.
func TestFilledProblem(t *testing.T) {
	c, err := ConfigOf(Small)
	if err != nil {
		t.Fatal(err)
	}
	c.FillEvents = 1<<18 + 5000 // two batches, the last one partial
	p, err := filledProblem(context.Background(), c)
	if err != nil {
		t.Fatal(err)
	}
	nr, nt := p.Migrations.Dims()
	want, reco := make([]float64, nt), make([]float64, nt)
	for b := 0; b < 2; b++ {
		rng := rand.New(rand.NewPCG(0x5eed, uint64(b)))
		for e := b << 18; e < min(c.FillEvents, (b+1)<<18); e++ {
			tr, rc, w := event(rng, c)
			want[tr] += w
			if rc >= 0 {
				reco[tr] += w
			}
		}
	}
	cols := make([]float64, nt)
	p.Migrations.ColSums(cols)
	for j := range want {
		if math.Abs(p.Generated[j]-want[j]) > 1e-9*want[j] || math.Abs(cols[j]-reco[j]) > 1e-9*reco[j] {
			t.Fatalf("truth bin %d: generated %v, reconstructed %v; want %v, %v", j, p.Generated[j], cols[j], want[j], reco[j])
		}
	}
	rows := make([]float64, nr)
	p.Migrations.RowSums(rows)
	for i, v := range rows {
		if p.Data[i] != math.Round(v) {
			t.Fatalf("reco bin %d: data %v, want %v", i, p.Data[i], math.Round(v))
		}
	}
	if _, err := unfold.Prepare(p, unfold.InModel); err != nil {
		t.Fatal(err)
	}
}

// BenchmarkFineJob: the whole job of desmear bench at the fine grid
// (fill 50 M events, 4 iterations, 100 probes), run before anything else
// of the process has allocated; reports the medians of the fill, the
// unfolding and the whole, and the process's peak resident memory.
func BenchmarkFineJob(b *testing.B) {
	c, err := ConfigOf(Fine)
	if err != nil {
		b.Fatal(err)
	}
	var fill, unf, all []float64
	var peak, fillPeak int64
	var nnz int
	for range b.N {
		j, err := job(context.Background(), c)
		if err != nil {
			b.Fatal(err)
		}
		fill, unf, all = append(fill, j.JobFillS), append(unf, j.JobUnfoldS), append(all, j.JobS)
		peak, fillPeak, nnz = j.JobPeakRSSBytes, j.JobFillPeakRSSBytes, j.JobNonZeros
	}
	med := func(x []float64) float64 { slices.Sort(x); return x[len(x)/2] }
	b.ReportMetric(med(fill), "s/fill")
	b.ReportMetric(med(unf), "s/unfold")
	b.ReportMetric(med(all), "s/job")
	b.ReportMetric(float64(peak)/1e6, "MB-peak-RSS")
	b.ReportMetric(float64(fillPeak)/1e6, "MB-peak-RSS-fill")
	b.ReportMetric(float64(nnz), "non-zeros")
}

var (
	fineToys   = flag.Int("fine-toys", 1000, "toys of each run of BenchmarkFineToys")
	fineRounds = flag.Int("fine-toy-rounds", 3, "rounds of BenchmarkFineToys (medians)")
)

// BenchmarkFineToys measures a 1,000-toy ensemble directly:
// -fine-toys (1,000) Poisson toys of 4 iterations at the fine grid, the
// whole unfold.Unfold call with DiagonalToys on the family's problem, in
// -fine-toy-rounds (3) rounds. Each round also measures, just before, the
// marginal iteration (a prepared unfolding of 8 iterations less one of 4,
// over 4, without the log-likelihood, as the bench's iteration_ms) and a
// whole unfolding without uncertainty, so that a loaded host moves the
// figures of a round together. Reports the medians of the call's time
// (s/toys-call), of a toy's time ((call − whole unfolding) / toys), of the
// marginal iteration and, per round, of a toy's time over 4 marginal
// iterations (toy/4iter), the figure to compare across loads. With
// -cpuprofile it profiles the toys' path (their calls dominate).
func BenchmarkFineToys(b *testing.B) {
	c, err := ConfigOf(Fine)
	if err != nil {
		b.Fatal(err)
	}
	p, err := Problem(c)
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	k := c.Iterations
	u1, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: k})
	if err != nil {
		b.Fatal(err)
	}
	u2, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: 2 * k})
	if err != nil {
		b.Fatal(err)
	}
	u1.RecordLogLikelihood(false)
	u2.RecordLogLikelihood(false)
	_, nt := p.Migrations.Dims()
	dst := make([]float64, nt)
	m := &bayes.Settings{Iterations: k}
	s := &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: *fineToys, Seed: 1}
	var call, toy, iter, ratio []float64
	b.ResetTimer()
	for range b.N {
		for range *fineRounds {
			runtime.GC()
			t0 := time.Now()
			if _, err := u1.Unfold(ctx, dst, nil); err != nil {
				b.Fatal(err)
			}
			t1 := time.Now()
			if _, err := u2.Unfold(ctx, dst, nil); err != nil {
				b.Fatal(err)
			}
			it := (time.Since(t1) - t1.Sub(t0)).Seconds() / float64(k)
			t0 = time.Now()
			if _, err := unfold.Unfold(ctx, p, nil, m); err != nil {
				b.Fatal(err)
			}
			whole := time.Since(t0).Seconds()
			t0 = time.Now()
			if _, err := unfold.Unfold(ctx, p, s, m); err != nil {
				b.Fatal(err)
			}
			tc := time.Since(t0).Seconds()
			tt := (tc - whole) / float64(*fineToys)
			call, toy, iter = append(call, tc), append(toy, tt), append(iter, it)
			ratio = append(ratio, tt/(float64(k)*it))
		}
	}
	med := func(x []float64) float64 { x = slices.Clone(x); slices.Sort(x); return x[len(x)/2] }
	b.ReportMetric(med(call), "s/toys-call")
	b.ReportMetric(med(toy)*1e3, "ms/toy")
	b.ReportMetric(med(iter)*1e3, "ms/iteration")
	b.ReportMetric(med(ratio), "toy/4iter")
	b.ReportMetric(float64(*fineToys), "toys")
}
