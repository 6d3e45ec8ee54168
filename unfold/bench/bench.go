// Package bench is the machine benchmark of desmear: a seeded synthetic
// family of three-dimensional unfolding problems and the measurements
// made on one of them in a single run, each kernel reported beside the
// memory-bandwidth floor of the bytes it must move, measured in the same
// run. The command `desmear bench` runs it and prints the Results.
//
// The problem of a Size: a truth grid (20×20×20 up to 100×100×50 bins)
// and a reco grid twice as fine along the third axis; the outermost
// layer of bins of every axis of both grids stands for its under- and
// overflow. Each truth bin migrates to 20 distinct reco bins of its
// 3×3×4 reco neighbourhood (all three axes) with a Gaussian profile and
// an efficiency in [0.6, 0.95] (sparsetest.Banded3D); the data are
// Poisson-like around the fold of a truth falling along the third axis
// plus a flat background of fakes (2% of the mean count) inside the
// model. Everything is seeded: the same size gives the same problem.
package bench

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"runtime/debug"
	"slices"
	"strings"
	"syscall"
	"time"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/sparse/sparsetest"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/internal/eventfile"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// Size names a member of the problem family.
type Size string

// The sizes.
const (
	Small  Size = "small"  // truth 20×20×20, reco 20×20×40: 8,000 × 16,000 bins, 160 k non-zeros
	Medium Size = "medium" // truth 50×50×40, reco 50×50×80: 100,000 × 200,000 bins, 2 M non-zeros
	Fine   Size = "fine"   // truth 100×100×50, reco 100×100×100: 500,000 × 1,000,000 bins, 10 M non-zeros
)

// Sizes lists the sizes, smallest first.
var Sizes = []Size{Small, Medium, Fine}

// Config is what a run measures at a size.
type Config struct {
	Truth, Reco   [3]int
	Rounds        int // interleaved rounds of the kernel measurements (medians)
	Iterations    int // of an unfolding
	Probes, Toys  int // Toys: a multiple of unfold.ToyBlock (see uncertainties)
	FillEvents    int // events generated in memory for the response filling
	ParquetEvents int // events written to and read from a Parquet file
	ParquetRounds int // interleaved rounds of decoding and filling it (medians)
}

// ConfigOf returns the configuration of size s, or an error naming the
// sizes for an unknown one.
func ConfigOf(s Size) (Config, error) {
	c := Config{Rounds: 6, Iterations: 4, Probes: 100, ParquetRounds: 6}
	switch s {
	case Small:
		c.Truth, c.Reco = [3]int{20, 20, 20}, [3]int{20, 20, 40}
		c.Toys, c.FillEvents, c.ParquetEvents = 12*unfold.ToyBlock, 1<<20, 1<<18
	case Medium:
		c.Truth, c.Reco = [3]int{50, 50, 40}, [3]int{50, 50, 80}
		c.Toys, c.FillEvents, c.ParquetEvents = 6*unfold.ToyBlock, 8<<20, 2<<20
	case Fine:
		c.Truth, c.Reco = [3]int{100, 100, 50}, [3]int{100, 100, 100}
		c.Toys, c.FillEvents, c.ParquetEvents = 3*unfold.ToyBlock, 50_000_000, 10<<20
	default:
		names := make([]string, len(Sizes))
		for i, z := range Sizes {
			names[i] = string(z)
		}
		return c, fmt.Errorf("unknown benchmark size %q (known: %s)", s, strings.Join(names, ", "))
	}
	return c, nil
}

// ByteModel describes how the floors of the Results count bytes.
const ByteModel = "one pass over the matrix per sweep (8-byte row index and 8-byte value per non-zero, 8-byte column pointers) " +
	"plus every vector read or written once: sweep +16 B per reco bin (y read, next written) and +24 B per truth bin (x read and written, 1/eps read); " +
	"iteration = sweep + 24 B per reco bin (data, background read, n/nu written) + 24 B per truth bin (chi-square pass); " +
	"floor = bytes / triad bandwidth (STREAM counting, 24 B per element, arrays each larger than the matrix)"

// Results are the figures of one run. Times are medians over the rounds;
// ratios are taken inside the run.
type Results struct {
	Size      Size   `json:"size"`
	TruthBins int    `json:"truth_bins"`
	RecoBins  int    `json:"reco_bins"`
	NonZeros  int    `json:"non_zeros"`
	Cores     int    `json:"cores"`
	Rounds    int    `json:"rounds"`
	Date      string `json:"date"`

	TriadGBs            float64 `json:"triad_gbs"`
	SweepMS             float64 `json:"sweep_ms"`
	SweepFloorRatio     float64 `json:"sweep_floor_ratio"`
	IterationMS         float64 `json:"iteration_ms"`
	IterationFloorRatio float64 `json:"iteration_floor_ratio"`
	// IterationSweepRatio and IterationLogLikSweepRatio are medians over
	// the rounds of each round's ratio.
	IterationSweepRatio float64 `json:"iteration_sweep_ratio"`
	// IterationLogLikMS is the marginal iteration that also records the
	// log-likelihood of every step (one logarithm per reco bin), as a
	// single unfolding does; IterationMS is the ensembles' form without it.
	IterationLogLikMS         float64 `json:"iteration_loglik_ms"`
	IterationLogLikSweepRatio float64 `json:"iteration_loglik_sweep_ratio"`
	// IterationEstimate is "difference" (the median over rounds of the
	// difference between 2K and K iterations, over K) or "upper-bound"
	// (the noise swamped the difference: 2K iterations' time over 2K).
	IterationEstimate string  `json:"iteration_estimate"`
	UnfoldingFixedMS  float64 `json:"unfolding_fixed_ms"` // prepared unfolding − Iterations × marginal iteration, at least 0
	PreparedMS        float64 `json:"prepared_unfolding_ms"`
	UnfoldingMS       float64 `json:"unfolding_ms"`
	Iterations        int     `json:"iterations"`
	Probes            int     `json:"probes"`
	ProbesS           float64 `json:"probes_s"`
	Toys              int     `json:"toys"`
	ToysPerS          float64 `json:"toys_per_s"`
	FillEvents        int     `json:"fill_events"`
	FillEntriesPerS   float64 `json:"fill_entries_per_s"`
	ParquetEvents     int     `json:"parquet_events"`
	ParquetEventsPerS float64 `json:"parquet_events_per_s"`
	// ParquetDecodeEventsPerS is the reader's own rate for the seven
	// columns the filling needs (decoding only, one goroutine), and
	// ParquetDecodeRatio the filling's rate over it; both medians of
	// ParquetRounds interleaved rounds, as is ParquetEventsPerS.
	ParquetDecodeEventsPerS float64 `json:"parquet_decode_events_per_s"`
	ParquetDecodeRatio      float64 `json:"parquet_decode_ratio"`
	// The same per second of the process's CPU time (user and system,
	// all goroutines), which other processes on the machine move less.
	ParquetEventsPerCPUS       float64 `json:"parquet_events_per_cpu_s"`
	ParquetDecodeEventsPerCPUS float64 `json:"parquet_decode_events_per_cpu_s"`
	ParquetDecodeCPURatio      float64 `json:"parquet_decode_cpu_ratio"`
	ParquetRounds              int     `json:"parquet_rounds"`
	PeakRSSBytes               int64   `json:"peak_rss_bytes"`
	// Job is the whole job (fill, unfolding, probes), measured first.
	Job
	ByteModel string `json:"byte_model"`
}

// Problem returns the problem of configuration c.
func Problem(c Config) (*unfold.Problem, error) {
	b, err := sparsetest.Banded3D(c.Truth, c.Reco, [3]int{3, 3, 4}, 20, 1)
	if err != nil {
		return nil, err
	}
	a, err := sparse.NewMatrix(b.Rows, b.Cols, b.ColPtr, b.RowIdx, b.Val, nil)
	if err != nil {
		return nil, err
	}
	nr, nt := a.Dims()
	gen := make([]float64, nt)
	mu := make([]float64, nt)
	for j := range gen {
		gen[j] = 1 // R = A: the column sums are the efficiencies
		z := j / (c.Truth[0] * c.Truth[1])
		mu[j] = 50 + 500*math.Exp(-float64(z)*50/float64(c.Truth[2])/15)
	}
	fold := make([]float64, nr)
	a.Fold(fold, mu)
	var mean float64
	for _, f := range fold {
		mean += f / float64(nr)
	}
	bkg := make([]float64, nr)
	data := make([]float64, nr)
	rng := rand.New(rand.NewPCG(2, 3))
	for i, f := range fold {
		bkg[i] = 0.02 * mean
		v := f + bkg[i]
		data[i] = math.Max(0, math.Round(v+math.Sqrt(v)*rng.NormFloat64()))
	}
	return &unfold.Problem{Migrations: a, Generated: gen, Data: data, Background: bkg}, nil
}

// Run measures configuration c of size s. progress, when not nil, is
// called with the name of each stage as it starts. Work files (the
// Parquet sample) go to a temporary folder removed at the end.
func Run(ctx context.Context, s Size, c Config, progress func(stage string)) (*Results, error) {
	note := func(st string) {
		if progress != nil {
			progress(st)
		}
	}
	// the whole job first: the peak resident memory at its end is its own
	note(fmt.Sprintf("whole job: fill %d events, %d iterations, %d probes", c.FillEvents, c.Iterations, c.Probes))
	j, err := job(ctx, c)
	if err != nil {
		return nil, err
	}
	runtime.GC()
	debug.FreeOSMemory()
	note("problem")
	p, err := Problem(c)
	if err != nil {
		return nil, err
	}
	a := p.Migrations
	nr, nt := a.Dims()
	r := &Results{Size: s, TruthBins: nt, RecoBins: nr, NonZeros: a.NNZ(), Cores: runtime.GOMAXPROCS(0),
		Rounds: c.Rounds, Iterations: c.Iterations, Probes: c.Probes, Toys: c.Toys,
		FillEvents: c.FillEvents, ParquetEvents: c.ParquetEvents, ByteModel: ByteModel,
		Date: time.Now().UTC().Format("2006-01-02"), Job: *j}
	if err := kernels(ctx, r, p, c, note); err != nil {
		return nil, err
	}
	if err := uncertainties(ctx, r, p, c, note); err != nil {
		return nil, err
	}
	note("response filling in memory")
	if r.FillEntriesPerS, err = fill(ctx, c); err != nil {
		return nil, err
	}
	note("response filling from Parquet")
	if err = fillParquet(ctx, r, c); err != nil {
		return nil, err
	}
	r.PeakRSSBytes = peakRSS()
	return r, nil
}

func median(d []time.Duration) time.Duration {
	s := slices.Clone(d)
	slices.Sort(s)
	return s[len(s)/2]
}

func ms(d time.Duration) float64 { return d.Seconds() * 1e3 }

// kernels measures, in interleaved rounds, the triad bandwidth, the bare
// sweep, the reused unfolding with Iterations and with twice as many
// iterations (their difference is the marginal iteration, the rest the
// fixed cost) and the whole unfolding.
func kernels(ctx context.Context, r *Results, p *unfold.Problem, c Config, note func(string)) error {
	note("kernels")
	a := p.Migrations
	nr, nt := a.Dims()
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		return err
	}
	u1, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: c.Iterations})
	if err != nil {
		return err
	}
	u2, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: 2 * c.Iterations})
	if err != nil {
		return err
	}
	// the ensembles' form (toys, replicas, refits): no log-likelihood
	u1.RecordLogLikelihood(false)
	u2.RecordLogLikelihood(false)
	l1, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: c.Iterations})
	if err != nil {
		return err
	}
	l2, err := bayes.NewUnfolder(pr, &bayes.Settings{Iterations: 2 * c.Iterations})
	if err != nil {
		return err
	}
	dst := make([]float64, nt)
	x, y, next := make([]float64, nt), make([]float64, nr), make([]float64, nr)
	for i := range y {
		y[i] = 1
	}
	inv := pr.InvEfficiency()
	upd := func(j int, g float64) float64 { v := x[j] * g * inv[j]; x[j] = v; return v }
	tr := sparsetest.NewTriad(max(2*a.NNZ(), 1<<22)) // each array holds as many bytes as the matrix (16 B per non-zero)
	var ts, t1, t2, tl1, tl2, tw []time.Duration
	var bw []float64
	for range c.Rounds {
		if err := ctx.Err(); err != nil {
			return err
		}
		bw = append(bw, tr.Bandwidth(3))
		for j := range x {
			x[j] = 1
		}
		t0 := time.Now()
		for range c.Iterations { // as many sweeps as an unfolding's iterations
			a.Sweep(next, y, upd)
		}
		ts = append(ts, time.Since(t0)/time.Duration(c.Iterations))
		t0 = time.Now()
		if _, err := u1.Unfold(ctx, dst, nil); err != nil {
			return err
		}
		t1 = append(t1, time.Since(t0))
		t0 = time.Now()
		if _, err := u2.Unfold(ctx, dst, nil); err != nil {
			return err
		}
		t2 = append(t2, time.Since(t0))
		t0 = time.Now()
		if _, err := l1.Unfold(ctx, dst, nil); err != nil {
			return err
		}
		tl1 = append(tl1, time.Since(t0))
		t0 = time.Now()
		if _, err := l2.Unfold(ctx, dst, nil); err != nil {
			return err
		}
		tl2 = append(tl2, time.Since(t0))
		t0 = time.Now()
		if _, err := unfold.Unfold(ctx, p, nil, &bayes.Settings{Iterations: c.Iterations}); err != nil {
			return err
		}
		tw = append(tw, time.Since(t0))
	}
	slices.Sort(bw)
	r.TriadGBs = bw[len(bw)/2] / 1e9
	k := float64(c.Iterations)
	sweep, m1 := median(ts), median(t1)
	// The marginal iteration from the differences of the same round (a
	// loaded host moves both); when the noise swamps it (no positive
	// median), the whole 2K-iteration unfolding over 2K, an upper bound.
	marginal := func(t1, t2 []time.Duration) (time.Duration, bool) {
		diffs := make([]time.Duration, len(t1))
		for i := range t1 {
			diffs[i] = t2[i] - t1[i]
		}
		if d := time.Duration(float64(median(diffs)) / k); d > 0 {
			return d, true
		}
		return time.Duration(float64(median(t2)) / (2 * k)), false
	}
	iter, ok := marginal(t1, t2)
	r.IterationEstimate = "difference"
	if !ok {
		r.IterationEstimate = "upper-bound"
	}
	iterLL, _ := marginal(tl1, tl2)
	r.IterationLogLikMS = ms(iterLL)
	// the ratios to the sweep: medians of the ratios inside each round
	// (a loaded host moves whole rounds), the medians' ratio as fallback
	perRound := func(t1, t2 []time.Duration, fallback time.Duration) float64 {
		q := make([]float64, 0, len(t1))
		for i := range t1 {
			if d := t2[i] - t1[i]; d > 0 {
				q = append(q, float64(d)/k/float64(ts[i]))
			}
		}
		if len(q) < (len(t1)+1)/2 {
			return float64(fallback) / float64(sweep)
		}
		slices.Sort(q)
		return q[len(q)/2]
	}
	r.IterationLogLikSweepRatio = perRound(tl1, tl2, iterLL)
	matrix := float64(16*a.NNZ() + 8*(nt+1))
	sweepBytes := matrix + 16*float64(nr) + 24*float64(nt)
	iterBytes := sweepBytes + 24*float64(nr) + 24*float64(nt)
	floor := func(bytes float64) float64 { return bytes / (r.TriadGBs * 1e9) }
	r.SweepMS = ms(sweep)
	r.SweepFloorRatio = sweep.Seconds() / floor(sweepBytes)
	r.IterationMS = ms(iter)
	r.IterationFloorRatio = iter.Seconds() / floor(iterBytes)
	r.IterationSweepRatio = perRound(t1, t2, iter)
	r.PreparedMS = ms(m1)
	r.UnfoldingFixedMS = max(0, ms(m1)-k*r.IterationMS) // 0 when within the noise of the iterations
	r.UnfoldingMS = ms(median(tw))
	return nil
}

// uncertainties measures the whole unfolding with per-bin variances from
// Probes probes and the toys per second of Toys Poisson toys (the time of
// the call with toys less that of a whole unfolding, per toy).
//
// The iterative method unfolds its toys in blocks of unfold.ToyBlock, and
// a last, partial block runs another loop of the sweep (the kernel for a
// full block does not apply), at another cost per toy. The sizes' Toys
// are multiples of ToyBlock so that the bench times full blocks only, as
// an ensemble of 1,000 toys (125 blocks) runs them: toys_per_s predicts
// such an ensemble (Toys/toys_per_s its time less one whole unfolding).
func uncertainties(ctx context.Context, r *Results, p *unfold.Problem, c Config, note func(string)) error {
	m := &bayes.Settings{Iterations: c.Iterations}
	note(fmt.Sprintf("%d probes", c.Probes))
	t0 := time.Now()
	if _, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: c.Probes, Seed: 1}, m); err != nil {
		return err
	}
	r.ProbesS = time.Since(t0).Seconds()
	note(fmt.Sprintf("%d toys", c.Toys))
	t0 = time.Now()
	if _, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: c.Toys, Seed: 1}, m); err != nil {
		return err
	}
	toys := time.Since(t0).Seconds() - r.UnfoldingMS/1e3
	r.ToysPerS = float64(c.Toys) / math.Max(toys, 1e-9)
	return nil
}

// peakRSS returns the process's peak resident memory in bytes (0 where
// the system does not report it).
func peakRSS() int64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return ru.Maxrss * 1024 // kilobytes on Linux
}

// event draws one simulated event of the grids of c: a truth cell
// (uniform on the first two axes, falling along the third), reconstructed
// with probability 0.9, smeared by up to ±1 cell on the first two axes
// and ±2 reco cells on the third (twice as fine); the reco cell is −1
// when lost or outside the grid.
func event(rng *rand.Rand, c Config) (truth, reco int, w float64) {
	t, q := c.Truth, c.Reco
	u := rng.Uint64()
	ix, iy := int(u%uint64(t[0])), int((u>>16)%uint64(t[1]))
	iz := min(int(float64(t[2])/3*rng.ExpFloat64()), t[2]-1)
	truth = ix + t[0]*(iy+t[1]*iz)
	w = 0.8 + 0.4*float64((u>>32)&0xff)/255
	if (u>>40)%10 == 0 {
		return truth, -1, w
	}
	rx := ix*q[0]/t[0] + int((u>>44)%3) - 1
	ry := iy*q[1]/t[1] + int((u>>48)%3) - 1
	rz := iz*q[2]/t[2] + int((u>>52)%5) - 2
	if rx < 0 || rx >= q[0] || ry < 0 || ry >= q[1] || rz < 0 || rz >= q[2] {
		return truth, -1, w
	}
	return truth, rx + q[0]*(ry+q[1]*rz), w
}

// fill accumulates the migrations of FillEvents events generated in
// memory (accumulate) and returns the reconstructed entries per second,
// the compression to the matrix and the generation of the events
// included.
func fill(ctx context.Context, c Config) (float64, error) {
	start := time.Now()
	_, _, n, err := accumulate(ctx, c, false)
	if err != nil {
		return 0, err
	}
	return float64(n) / time.Since(start).Seconds(), nil
}

// fillParquet writes ParquetEvents events with three observables at each
// level and a weight to a Parquet file in a temporary folder, then
// measures in interleaved rounds the building of the response from it
// through an analysis, as `desmear response` does (decoding, the
// observables, the location, the accumulation and the file's SHA-256;
// the writing not included), and the reader decoding the same seven
// columns alone. It records the medians of the events per second of both
// and of their ratio in r.
func fillParquet(ctx context.Context, r *Results, c Config) error {
	dir, err := os.MkdirTemp("", "desmear-bench-")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	n := c.ParquetEvents
	names, cols := eventColumns(n)
	sim := filepath.Join(dir, "sim.parquet")
	if err := eventfile.WriteParquet(sim, names, cols); err != nil {
		return err
	}
	cols = nil
	an, err := parquetAnalysis(dir, sim, c)
	if err != nil {
		return err
	}
	rounds := max(c.ParquetRounds, 1)
	var fills, decodes, ratios, cpuFills, cpuDecodes, cpuRatios []float64
	for range rounds {
		t0, c0 := time.Now(), cpuTime()
		if err := decodeParquet(ctx, sim, names, n); err != nil {
			return err
		}
		t1, c1 := time.Now(), cpuTime()
		built, _, err := an.BuildResponse(ctx, nil)
		if err != nil {
			return err
		}
		if built.Summary.Events != int64(n) {
			return fmt.Errorf("the response read %d of %d events", built.Summary.Events, n)
		}
		t2, c2 := time.Now(), cpuTime()
		decodes = append(decodes, float64(n)/t1.Sub(t0).Seconds())
		fills = append(fills, float64(n)/t2.Sub(t1).Seconds())
		ratios = append(ratios, fills[len(fills)-1]/decodes[len(decodes)-1])
		cpuDecodes = append(cpuDecodes, float64(n)/(c1-c0).Seconds())
		cpuFills = append(cpuFills, float64(n)/(c2-c1).Seconds())
		cpuRatios = append(cpuRatios, cpuFills[len(cpuFills)-1]/cpuDecodes[len(cpuDecodes)-1])
	}
	r.ParquetRounds = rounds
	r.ParquetEventsPerS, r.ParquetDecodeEventsPerS, r.ParquetDecodeRatio = medianFloat(fills), medianFloat(decodes), medianFloat(ratios)
	r.ParquetEventsPerCPUS, r.ParquetDecodeEventsPerCPUS, r.ParquetDecodeCPURatio = medianFloat(cpuFills), medianFloat(cpuDecodes), medianFloat(cpuRatios)
	return nil
}

// eventColumns returns the seeded events of the filling measurements:
// three truth observables in [0, 1) (the third falling exponentially),
// their reco values smeared by a Gaussian of 0.02, and a weight in
// [0.5, 1.5).
func eventColumns(n int) ([]string, [][]float64) {
	names := []string{"xt", "yt", "zt", "xr", "yr", "zr", "w"}
	cols := make([][]float64, len(names))
	for k := range cols {
		cols[k] = make([]float64, n)
	}
	rng := rand.New(rand.NewPCG(20, 3))
	for k := 0; k < n; k++ {
		for a := 0; a < 3; a++ {
			t := rng.Float64()
			if a == 2 {
				t = math.Min(rng.ExpFloat64()/3, 0.999999)
			}
			cols[a][k] = t
			cols[3+a][k] = t + 0.02*rng.NormFloat64()
		}
		cols[6][k] = 0.5 + rng.Float64()
	}
	return names, cols
}

// cpuTime returns the CPU time (user and system) the process has used.
func cpuTime() time.Duration {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return time.Duration(ru.Utime.Nano() + ru.Stime.Nano())
}

// decodeParquet reads the named columns of the n events of the Parquet
// file at path in batches of 4096 events, touching every value.
func decodeParquet(ctx context.Context, path string, names []string, n int) error {
	src, err := events.OpenParquet(path)
	if err != nil {
		return err
	}
	defer src.Close()
	var got int64
	var sum float64
	err = src.Read(ctx, names, 4096, func(b *events.Batch) error {
		got += int64(b.Len)
		for _, col := range b.Cols {
			for _, v := range col {
				sum += v
			}
		}
		return nil
	})
	if err != nil {
		return err
	}
	if got != int64(n) || math.IsNaN(sum) {
		return fmt.Errorf("decoding read %d of %d events", got, n)
	}
	return nil
}

func medianFloat(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	return s[len(s)/2]
}

// parquetAnalysis returns the analysis filling the response of c's
// binnings from the sample sim, the weight in column w.
func parquetAnalysis(dir, sim string, c Config) (*analysis.Analysis, error) {
	edges := func(n int) string {
		var b strings.Builder
		b.WriteString("[")
		for i := 0; i <= n; i++ {
			if i > 0 {
				b.WriteString(", ")
			}
			fmt.Fprint(&b, float64(i)/float64(n))
		}
		b.WriteString("]")
		return b.String()
	}
	axes := func(g [3]int) string {
		var b strings.Builder
		for a, name := range []string{"x", "y", "z"} {
			fmt.Fprintf(&b, "          - {name: %s, edges: %s, underflow: true, overflow: true}\n", name, edges(g[a]-2))
		}
		return b.String()
	}
	src := "binning:\n  truth:\n    regions:\n      - name: cube\n        axes:\n" + axes(c.Truth) +
		"  reco:\n    regions:\n      - name: cube\n        axes:\n" + axes(c.Reco) +
		"observables:\n  truth: {x: xt, y: yt, z: zt}\n  reco: {x: xr, y: yr, z: zr}\n" +
		"simulation:\n  - file: " + sim + "\n    weight: w\n" +
		"data:\n  table: n.csv\noutput:\n  folder: out\n"
	return analysis.Decode([]byte(src), filepath.Join(dir, "analysis.yaml"))
}
