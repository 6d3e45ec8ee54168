package bench

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"sync"
	"time"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// Job is the whole unfolding job of a run, measured first (before any
// other stage has allocated), so that the process's peak resident memory
// at its end is the job's: the response filled from FillEvents events
// generated in memory (as fill does), the data taken as the rounded reco
// distribution of the simulation, and one unfolding with Iterations
// iterations and the per-bin variances of Probes probes.
type Job struct {
	JobEvents       int     `json:"job_events"`
	JobFillS        float64 `json:"job_fill_s"`
	JobUnfoldS      float64 `json:"job_unfold_s"` // the unfolding with the probes, validation and set-up included
	JobS            float64 `json:"job_s"`        // fill + unfold
	JobPeakRSSBytes int64   `json:"job_peak_rss_bytes"`
	// JobFillPeakRSSBytes is the peak resident memory at the end of the
	// fill (the accumulation's peak).
	JobFillPeakRSSBytes int64 `json:"job_fill_peak_rss_bytes"`
	JobNonZeros         int   `json:"job_non_zeros"` // of the filled response
}

// job runs and times the whole job of c.
func job(ctx context.Context, c Config) (*Job, error) {
	j := &Job{JobEvents: c.FillEvents}
	t0 := time.Now()
	p, err := filledProblem(ctx, c)
	if err != nil {
		return nil, err
	}
	j.JobFillS = time.Since(t0).Seconds()
	j.JobFillPeakRSSBytes, j.JobNonZeros = peakRSS(), p.Migrations.NNZ()
	t1 := time.Now()
	s := &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: c.Probes, Seed: 1}
	if _, err := unfold.Unfold(ctx, p, s, &bayes.Settings{Iterations: c.Iterations}); err != nil {
		return nil, err
	}
	j.JobUnfoldS = time.Since(t1).Seconds()
	j.JobS = time.Since(t0).Seconds()
	j.JobPeakRSSBytes = peakRSS()
	return j, nil
}

// filledProblem fills the migrations of FillEvents events of c (fill's
// events) and takes as generated the events of every truth bin,
// reconstructed or not; the data are the rounded reco distribution of
// the simulation.
func filledProblem(ctx context.Context, c Config) (*unfold.Problem, error) {
	a, gen, _, err := accumulate(ctx, c, true)
	if err != nil {
		return nil, err
	}
	nr, _ := a.Dims()
	data := make([]float64, nr)
	a.RowSums(data)
	for i, v := range data {
		data[i] = math.Round(v)
	}
	return &unfold.Problem{Migrations: a, Generated: gen, Data: data}, nil
}

// accumulate fills the migrations of FillEvents events generated in
// memory, in batches of 2^18 (PCG stream b of seed 0x5eed for batch b)
// on GOMAXPROCS goroutines, and returns the matrix, the generated
// weights of every truth bin when generated is set (nil otherwise) and
// the number of reconstructed entries. The generated weights are
// 0.8 + 0.4 q/255 with an integer q (see event), so their sums are kept
// as integer counts and sums of q, exact whatever the order of the
// batches.
func accumulate(ctx context.Context, c Config, generated bool) (*sparse.Matrix, []float64, int64, error) {
	nr := c.Reco[0] * c.Reco[1] * c.Reco[2]
	nt := c.Truth[0] * c.Truth[1] * c.Truth[2]
	// the fill's memory budget (sparse.AccumulatorBytes) within the
	// default memory limit, as the unfolding's
	acc, err := sparse.NewAccumulator(nr, nt, &sparse.AccumulatorOptions{MemoryLimit: unfold.DefaultMemoryLimit})
	if err != nil {
		return nil, nil, 0, err
	}
	const batch = 1 << 18
	nb := (c.FillEvents + batch - 1) / batch
	workers := runtime.GOMAXPROCS(0)
	errs := make([]error, workers)
	entries := make([]int64, workers)
	// per worker and truth bin: the events and their sum of q, side by
	// side (one cache line per event)
	gen := make([][][2]int64, workers)
	var next int64
	var mu sync.Mutex
	var wg sync.WaitGroup
	for w := range workers {
		if generated {
			gen[w] = make([][2]int64, nt)
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			rows, cols, wts := make([]int32, 0, batch), make([]int32, 0, batch), make([]float64, 0, batch)
			gw := gen[w]
			var cnt *genCounter
			eg := newEventGen(c)
			if generated {
				cnt = newGenCounter(nt, batch)
			}
			for {
				mu.Lock()
				b := next
				next++
				mu.Unlock()
				if b >= int64(nb) || ctx.Err() != nil {
					return
				}
				rng := rand.New(rand.NewPCG(0x5eed, uint64(b)))
				n := min(c.FillEvents, int(b+1)*batch) - int(b)*batch
				rows, cols, wts = eg.batch(rng, n, rows[:0], cols[:0], wts[:0], cnt)
				if generated {
					cnt.flush(gw)
				}
				entries[w] += int64(len(rows))
				if err := acc.AddBatch(uint64(b), rows, cols, wts); err != nil {
					errs[w] = err
					return
				}
			}
		}()
	}
	wg.Wait()
	if err := ctx.Err(); err != nil {
		return nil, nil, 0, err
	}
	for _, err := range errs {
		if err != nil {
			return nil, nil, 0, err
		}
	}
	a, _, err := acc.Matrix()
	if err != nil {
		return nil, nil, 0, err
	}
	var n int64
	for _, e := range entries {
		n += e
	}
	if !generated {
		return a, nil, n, nil
	}
	g := make([]float64, nt)
	for t := range g {
		var k, q int64
		for w := range workers {
			k, q = k+gen[w][t][0], q+gen[w][t][1]
		}
		g[t] = 0.8*float64(k) + 0.4*float64(q)/255
	}
	return a, g, n, nil
}

// genSpanBits sets the truth bins of one bucket of a genCounter: 2^12
// bins, 64 KiB of counts, whose pages and lines are near one another
// while the bucket's events are counted.
const genSpanBits = 12

// genCounter counts a batch's events into the per-truth-bin counts and
// sums of q of a worker without a random access to the 8 MB of counts
// per event: the events, packed as t<<8 | q, are first distributed by
// truth bucket (a counting sort on t >> genSpanBits), then counted bucket
// by bucket, within 64 KiB at a time. The counts are
// integers, so the order of the additions does not change them.
type genCounter struct {
	tq, sorted []uint64
	heads      []int
}

func newGenCounter(nt, batch int) *genCounter {
	return &genCounter{
		tq:     make([]uint64, 0, batch),
		sorted: make([]uint64, batch),
		heads:  make([]int, nt>>genSpanBits+2),
	}
}

// flush adds the recorded events to gw (events, sum of q per truth bin)
// and empties the counter.
func (g *genCounter) flush(gw [][2]int64) {
	heads := g.heads
	clear(heads)
	for _, v := range g.tq {
		heads[v>>(8+genSpanBits)+1]++
	}
	for b := 1; b < len(heads); b++ {
		heads[b] += heads[b-1]
	}
	sorted := g.sorted[:len(g.tq)]
	for _, v := range g.tq {
		b := v >> (8 + genSpanBits)
		sorted[heads[b]] = v
		heads[b]++
	}
	for _, v := range sorted {
		c := &gw[v>>8]
		c[0]++
		c[1] += int64(v & 0xff)
	}
	g.tq = g.tq[:0]
}

// eventGen draws the events of event for one configuration, with its
// constants formed once: the same draws and the same arithmetic (the
// reco cell's offsets and the weights taken from tables of the values
// event computes), so the same events bit for bit.
type eventGen struct {
	tx, ty     uint64
	nx, nxy    int
	zmax       int
	zscale     float64 // Truth[2]/3
	qx, qxy    int
	rx, ry, rz []int // ix·Reco[0]/Truth[0] − 1, iy·Reco[1]/Truth[1] − 1, iz·Reco[2]/Truth[2] − 2
	qw, qy, qz int   // the reco grid's sizes, for the bounds
	w          [256]float64
}

func newEventGen(c Config) *eventGen {
	t, q := c.Truth, c.Reco
	g := &eventGen{
		tx: uint64(t[0]), ty: uint64(t[1]), nx: t[0], nxy: t[0] * t[1], zmax: t[2] - 1,
		zscale: float64(t[2]) / 3, qx: q[0], qxy: q[0] * q[1], qw: q[0], qy: q[1], qz: q[2],
		rx: make([]int, t[0]), ry: make([]int, t[1]), rz: make([]int, t[2]),
	}
	for i := range g.rx {
		g.rx[i] = i*q[0]/t[0] - 1
	}
	for i := range g.ry {
		g.ry[i] = i*q[1]/t[1] - 1
	}
	for i := range g.rz {
		g.rz[i] = i*q[2]/t[2] - 2
	}
	for k := range g.w {
		g.w[k] = 0.8 + 0.4*float64(k)/255
	}
	return g
}

// batch draws n events from rng, appends the reconstructed ones to rows,
// cols and wts, and records every event in cnt when it is not nil (its
// truth bin and weight code q, the weight being 0.8 + 0.4 q/255).
func (g *eventGen) batch(rng *rand.Rand, n int, rows, cols []int32, wts []float64, cnt *genCounter) ([]int32, []int32, []float64) {
	rx, ry, rz := g.rx, g.ry, g.rz
	for range n {
		u := rng.Uint64()
		ix, iy := int(u%g.tx), int((u>>16)%g.ty)
		iz := min(int(g.zscale*rng.ExpFloat64()), g.zmax)
		truth := ix + g.nx*iy + g.nxy*iz
		q := (u >> 32) & 0xff
		if cnt != nil {
			cnt.tq = append(cnt.tq, uint64(truth)<<8|q)
		}
		if (u>>40)%10 == 0 {
			continue
		}
		x := rx[ix] + int((u>>44)%3)
		y := ry[iy] + int((u>>48)%3)
		z := rz[iz] + int((u>>52)%5)
		if uint(x) >= uint(g.qw) || uint(y) >= uint(g.qy) || uint(z) >= uint(g.qz) {
			continue
		}
		rows, cols, wts = append(rows, int32(x+g.qx*y+g.qxy*z)), append(cols, int32(truth)), append(wts, g.w[q])
	}
	return rows, cols, wts
}
