package bayes

import (
	"context"
	"github.com/desmear/desmear/unfold"
	"math"
	"math/rand/v2"
	"runtime"
	"runtime/metrics"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/sparse/sparsetest"
)

// benchProblem builds an invented benchmark problem on the shared banded
// 3-D response of package sparsetest: G_j = 1 (so R = A), a truth falling
// along the last truth axis, Poisson-like data around its fold.
func benchProblem(b *testing.B, truth, reco [3]int) *unfold.Problem {
	b.Helper()
	m, err := sparsetest.Banded3D(truth, reco, [3]int{3, 3, 4}, 20, 1)
	if err != nil {
		b.Fatal(err)
	}
	a, err := sparse.NewMatrix(m.Rows, m.Cols, m.ColPtr, m.RowIdx, m.Val, nil)
	if err != nil {
		b.Fatal(err)
	}
	nr, nt := a.Dims()
	gen := make([]float64, nt)
	mu := make([]float64, nt)
	for j := range gen {
		gen[j] = 1
		z := j / (truth[0] * truth[1])
		mu[j] = 50 + 500*math.Exp(-float64(z)/15)
	}
	fold := make([]float64, nr)
	a.Fold(fold, mu)
	rng := rand.New(rand.NewPCG(2, 3))
	for i, f := range fold {
		fold[i] = math.Max(0, math.Round(f+math.Sqrt(f)*rng.NormFloat64()))
	}
	return &unfold.Problem{Migrations: a, Generated: gen, Data: fold}
}

var fine struct {
	once sync.Once
	p    *unfold.Problem
}

func fineProblem(b *testing.B) *unfold.Problem {
	fine.once.Do(func() { fine.p = benchProblem(b, [3]int{100, 100, 50}, [3]int{100, 100, 100}) })
	return fine.p
}

// bareSweeps returns a function making k bare fused sweeps of a (a
// trivial update), the yardstick of the iteration benchmarks.
func bareSweeps(a *sparse.Matrix) func(k int) {
	nr, nt := a.Dims()
	x := make([]float64, nt)
	y := make([]float64, nr)
	next := make([]float64, nr)
	for i := range y {
		y[i] = 1
	}
	upd := func(j int, g float64) float64 { x[j] = g * 0.5; return x[j] }
	return func(k int) {
		for range k {
			a.Sweep(next, y, upd)
			y, next = next, y
		}
	}
}

func median(d []time.Duration) time.Duration {
	s := slices.Clone(d)
	slices.Sort(s)
	return s[len(s)/2]
}

// BenchmarkFineIterations: 10 iterations without covariance at
// 500,000 truth × 1,000,000 reco bins (10M non-zeros): the whole Unfold
// call (validation, set-up, result copies) and the iteration loop alone,
// against 10 bare fused sweeps of the sparse layer measured in the same
// loop (interleaved). Reports the medians and the ratios.
func BenchmarkFineIterations(b *testing.B) {
	p := fineProblem(b)
	ctx := context.Background()
	s := &opts{Iterations: 10}
	sweeps := bareSweeps(p.Migrations)
	m, err := prepare(p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	it := newIterator(m, nil)
	rs, _ := s.resolve()
	var tu, ti, ts []time.Duration
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		if _, err := unfoldWith(ctx, p, s); err != nil {
			b.Fatal(err)
		}
		tu = append(tu, time.Since(t0))
		t0 = time.Now()
		if _, err := it.run(ctx, m.n, rs, nil); err != nil {
			b.Fatal(err)
		}
		ti = append(ti, time.Since(t0))
		t0 = time.Now()
		sweeps(10)
		ts = append(ts, time.Since(t0))
	}
	b.StopTimer()
	mu, mi, ms := median(tu), median(ti), median(ts)
	b.ReportMetric(mu.Seconds()*1e3, "ms/unfold10")
	b.ReportMetric(mi.Seconds()*1e3, "ms/iterations10")
	b.ReportMetric(ms.Seconds()*1e3, "ms/10sweeps")
	b.ReportMetric(float64(mu)/float64(ms), "unfold/sweeps")
	b.ReportMetric(float64(mi)/float64(ms), "iterations/sweeps")
}

// BenchmarkFineProbes: per-bin variances from 100 probes through 4
// iterations at 500,000 × 1,000,000 (the whole Unfold call).
func BenchmarkFineProbes(b *testing.B) {
	p := fineProblem(b)
	s := &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 100, Seed: 1}
	b.ResetTimer()
	benchUnfold(b, p, s)
}

// BenchmarkFullCovariance: the full linearised covariance at 5,000 truth ×
// 10,000 reco bins (20 non-zeros per column), for 4 and 10 iterations.
func BenchmarkFullCovariance(b *testing.B) {
	p := benchProblem(b, [3]int{25, 20, 10}, [3]int{25, 20, 20})
	for _, k := range []int{4, 10} {
		b.Run(map[int]string{4: "K=4", 10: "K=10"}[k], func(b *testing.B) {
			benchUnfold(b, p, &opts{Iterations: k, Covariance: unfold.Full})
		})
	}
}

// benchUnfold runs Unfold b.N times and reports the median time of a
// call as s/op-median.
func benchUnfold(b *testing.B, p *unfold.Problem, s *opts) {
	var d []time.Duration
	for range b.N {
		t0 := time.Now()
		if _, err := unfoldWith(context.Background(), p, s); err != nil {
			b.Fatal(err)
		}
		d = append(d, time.Since(t0))
	}
	b.ReportMetric(median(d).Seconds(), "s/op-median")
}

// BenchmarkFineIterationParts times the pieces of an iteration at the
// fine grid, 10 times each per round, interleaved: the bare fused sweep,
// the sweep with the iteration's update, the same with the row hook that
// forms ν, n/ν and the log-likelihood (one iteration's sweep), the reco
// work alone as a separate parallel pass, and the χ² pass. Reports the
// medians over the rounds.
func BenchmarkFineIterationParts(b *testing.B) {
	p := fineProblem(b)
	m, err := prepare(p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	it := newIterator(m, nil)
	it.start(m.n)
	sweep := bareSweeps(p.Migrations)
	parts := []struct {
		name string
		f    func()
	}{
		{"ms/10sweeps", func() { sweep(1) }},
		{"ms/10sweeps-update", func() { p.Migrations.Sweep(it.fnext, it.y, it.updateFunc(false)) }},
		{"ms/10sweeps-update-hook", func() { p.Migrations.SweepRows(it.fnext, it.y, it.updateFunc(false), it.rows) }},
		{"ms/10reco-passes", func() { it.recoAll(it.fnext, it.nunext, it.ynext) }},
		{"ms/10chi2-passes", func() { it.compare() }},
	}
	d := make([][]time.Duration, len(parts))
	b.ResetTimer()
	for range b.N {
		for k, pt := range parts {
			t0 := time.Now()
			for range 10 {
				pt.f()
			}
			d[k] = append(d[k], time.Since(t0))
		}
	}
	b.StopTimer()
	for k, pt := range parts {
		b.ReportMetric(median(d[k]).Seconds()*1e3, pt.name)
	}
}

// BenchmarkFinePrepared: the fixed cost of one more unfolding of a
// prepared problem at 500,000 × 1,000,000 (10M non-zeros), interleaved in
// one loop: a reused Unfolder with 4 and with 8 iterations (the
// difference over 4 is the marginal iteration, the rest of the 4-iteration
// call its fixed cost), the same pair without the log-likelihood
// (RecordLogLikelihood(false), the form of the ensembles), a whole
// unfold.Unfold call with 4 iterations, and 4 bare fused sweeps. Reports
// medians and same-run ratios.
func BenchmarkFinePrepared(b *testing.B) {
	p := fineProblem(b)
	ctx := context.Background()
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	u4, err := NewUnfolder(pr, &Settings{Iterations: 4})
	if err != nil {
		b.Fatal(err)
	}
	u8, err := NewUnfolder(pr, &Settings{Iterations: 8})
	if err != nil {
		b.Fatal(err)
	}
	u4n, err := NewUnfolder(pr, &Settings{Iterations: 4})
	if err != nil {
		b.Fatal(err)
	}
	u8n, err := NewUnfolder(pr, &Settings{Iterations: 8})
	if err != nil {
		b.Fatal(err)
	}
	u4n.RecordLogLikelihood(false)
	u8n.RecordLogLikelihood(false)
	_, nt := p.Migrations.Dims()
	dst := make([]float64, nt)
	sweeps := bareSweeps(p.Migrations)
	var t4, t8, t4n, t8n, tw, ts []time.Duration
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		if _, err := u4n.Unfold(ctx, dst, nil); err != nil {
			b.Fatal(err)
		}
		t4n = append(t4n, time.Since(t0))
		t0 = time.Now()
		if _, err := u8n.Unfold(ctx, dst, nil); err != nil {
			b.Fatal(err)
		}
		t8n = append(t8n, time.Since(t0))
		t0 = time.Now()
		if _, err := u4.Unfold(ctx, dst, nil); err != nil {
			b.Fatal(err)
		}
		t4 = append(t4, time.Since(t0))
		t0 = time.Now()
		if _, err := u8.Unfold(ctx, dst, nil); err != nil {
			b.Fatal(err)
		}
		t8 = append(t8, time.Since(t0))
		t0 = time.Now()
		if _, err := unfoldWith(ctx, p, &opts{Iterations: 4}); err != nil {
			b.Fatal(err)
		}
		tw = append(tw, time.Since(t0))
		t0 = time.Now()
		sweeps(4)
		ts = append(ts, time.Since(t0))
	}
	b.StopTimer()
	m4, m8, mw, ms := median(t4), median(t8), median(tw), median(ts)
	iter := (m8 - m4) / 4
	b.ReportMetric(m4.Seconds()*1e3, "ms/prepared4")
	b.ReportMetric(iter.Seconds()*1e3, "ms/iteration")
	b.ReportMetric((m4-4*iter).Seconds()*1e3, "ms/fixed")
	b.ReportMetric(float64(m4)/float64(4*iter), "prepared4/4iterations")
	b.ReportMetric(mw.Seconds()*1e3, "ms/unfold4")
	b.ReportMetric(float64(mw)/float64(4*iter), "unfold4/4iterations")
	b.ReportMetric(float64(4*iter)/float64(ms), "iteration/sweep")
	m4n, m8n := median(t4n), median(t8n)
	itn := (m8n - m4n) / 4
	b.ReportMetric(itn.Seconds()*1e3, "ms/iteration-nolog")
	b.ReportMetric(float64(4*itn)/float64(ms), "iteration-nolog/sweep")
	b.ReportMetric(float64(m4n)/float64(4*itn), "prepared4-nolog/4iterations")
}

// peakHeap runs f and returns the peak of the heap in use (objects and
// the unused part of in-use spans) above the level before it, sampled
// every 2 ms.
func peakHeap(f func()) uint64 {
	s := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}, {Name: "/memory/classes/heap/unused:bytes"}}
	read := func() uint64 { metrics.Read(s); return s[0].Value.Uint64() + s[1].Value.Uint64() }
	runtime.GC()
	base := read()
	var peak atomic.Uint64
	stop, done := make(chan struct{}), make(chan struct{})
	go func() {
		defer close(done)
		for {
			if h := read(); h > peak.Load() {
				peak.Store(h)
			}
			select {
			case <-stop:
				return
			case <-time.After(2 * time.Millisecond):
			}
		}
	}()
	f()
	close(stop)
	<-done
	if h := read(); h > peak.Load() {
		peak.Store(h)
	}
	return peak.Load() - min(base, peak.Load())
}

// BenchmarkFineProbeBlocks: per-bin variances from 100 probes through 4
// iterations at 500,000 × 1,000,000 (whole Unfold calls), the probes
// in blocks (one SweepBlock per block of unfold.ProbeBlock probes and
// iteration) and one by one (a Sweep per probe, the earlier path),
// interleaved. Reports the medians, their ratio and the peak heap
// above the problem's.
func BenchmarkFineProbeBlocks(b *testing.B) {
	benchBlocks(b, &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 100, Seed: 1}, &perProbe)
}

// benchBlocks times Unfold of the fine problem under s with *oneByOne
// false (blocks) and true, alternately (interleaved rounds), and reports the medians, their
// ratio and the median peak heaps.
func benchBlocks(b *testing.B, s *opts, oneByOne *bool) {
	p := fineProblem(b)
	defer func(v bool) { *oneByOne = v }(*oneByOne)
	var tb, to []time.Duration
	var hb, ho []float64
	b.ResetTimer()
	for range b.N {
		for _, one := range []bool{false, true} {
			*oneByOne = one
			var d time.Duration
			h := peakHeap(func() {
				t0 := time.Now()
				if _, err := unfoldWith(context.Background(), p, s); err != nil {
					b.Fatal(err)
				}
				d = time.Since(t0)
			})
			if one {
				to, ho = append(to, d), append(ho, float64(h))
			} else {
				tb, hb = append(tb, d), append(hb, float64(h))
			}
		}
	}
	b.StopTimer()
	mb, mo := median(tb), median(to)
	slices.Sort(hb)
	slices.Sort(ho)
	b.ReportMetric(mb.Seconds(), "s/blocks")
	b.ReportMetric(mo.Seconds(), "s/one-by-one")
	b.ReportMetric(float64(mb)/float64(mo), "blocks/one-by-one")
	b.ReportMetric(hb[len(hb)/2]/1e6, "MB-peak-heap/blocks")
	b.ReportMetric(ho[len(ho)/2]/1e6, "MB-peak-heap/one-by-one")
}

// BenchmarkFineIterationSweep: the marginal iteration against the bare
// fused sweep at the fine grid, in the same loop: per round 10 times in
// turn one bare sweep, one iteration step of the loop of a fixed number
// of iterations (the sweep with the iteration's update and hooks, the χ²
// and change, the swaps; not the last iteration) without the
// log-likelihood (the ensembles' form) and one with it, the problem with
// a flat background of 2% of the mean count (ν = R μ + b, as in desmear
// bench), and, as a second yardstick, the fused EM sweep of desmear bench
// (update x_j ← x_j g_j / eps_j: two more loads and a multiply per column
// than the bare sweep's). Reports the medians over the rounds and the
// median over the rounds of each round's ratio.
func BenchmarkFineIterationSweep(b *testing.B) {
	p0 := fineProblem(b)
	p := *p0
	var mean float64
	for _, x := range p.Data {
		mean += x / float64(len(p.Data))
	}
	p.Background = make([]float64, len(p.Data))
	for i := range p.Background {
		p.Background[i] = 0.02 * mean
	}
	m, err := prepare(&p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	it := newIterator(m, nil)
	it.start(m.n)
	// an iteration before the last of a fixed number (iterate's loop)
	it.lazyNu = true
	step := func(noLL bool) {
		it.noLL = noLL
		it.emStepReco(recoInPlace)
		it.compare()
		it.mu, it.next = it.next, it.mu
		it.y, it.fnext = it.fnext, it.y
	}
	sweep := bareSweeps(p.Migrations)
	// the fused EM sweep of desmear bench: x_j ← x_j g_j / eps_j
	nr, nt := p.Migrations.Dims()
	x, y, next := make([]float64, nt), make([]float64, nr), make([]float64, nr)
	for i := range y {
		y[i] = 1
	}
	inv := m.invEps
	upd := func(j int, g float64) float64 { v := x[j] * g * inv[j]; x[j] = v; return v }
	var ts, te, tn, tl []time.Duration
	var rn, rl, re []float64
	b.ResetTimer()
	for range b.N {
		var s, e, n, l time.Duration
		for range 10 {
			t0 := time.Now()
			sweep(1)
			s += time.Since(t0)
			for j := range x {
				x[j] = 1
			}
			t0 = time.Now()
			p.Migrations.Sweep(next, y, upd)
			e += time.Since(t0)
			t0 = time.Now()
			step(true)
			n += time.Since(t0)
			t0 = time.Now()
			step(false)
			l += time.Since(t0)
		}
		ts, te, tn, tl = append(ts, s/10), append(te, e/10), append(tn, n/10), append(tl, l/10)
		rn, rl, re = append(rn, float64(n)/float64(s)), append(rl, float64(l)/float64(s)), append(re, float64(n)/float64(e))
	}
	b.StopTimer()
	med := func(v []float64) float64 { v = slices.Clone(v); slices.Sort(v); return v[len(v)/2] }
	b.ReportMetric(median(ts).Seconds()*1e3, "ms/sweep")
	b.ReportMetric(median(tn).Seconds()*1e3, "ms/iteration")
	b.ReportMetric(median(tl).Seconds()*1e3, "ms/iteration-loglik")
	b.ReportMetric(med(rn), "iteration/sweep")
	b.ReportMetric(med(rl), "iteration-loglik/sweep")
	b.ReportMetric(median(te).Seconds()*1e3, "ms/em-sweep")
	b.ReportMetric(med(re), "iteration/em-sweep")
}

// BenchmarkFineToys: per-bin variances from 20 Poisson toys of 4
// iterations at the fine grid (one whole Unfold call per round, the
// nominal unfolding included), for profiles of the toy path.
func BenchmarkFineToys(b *testing.B) {
	p := fineProblem(b)
	ctx := context.Background()
	s := &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 20, Seed: 1}
	b.ResetTimer()
	for range b.N {
		if _, err := unfold.Unfold(ctx, p, s, &Settings{Iterations: 4}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkFineToyBlocks: per-bin variances from 32 Poisson toys of 4
// iterations at 500,000 × 1,000,000 (whole Unfold calls, the nominal
// unfolding included), the toys in blocks (one SweepBlock per block of
// unfold.ToyBlock toys and iteration) and one toy per core at a time (a
// Sweep per toy and iteration, the earlier path), interleaved. Reports
// the medians, their ratio and the peak heap above the problem's.
func BenchmarkFineToyBlocks(b *testing.B) {
	benchBlocks(b, &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 32, Seed: 1}, &perToy)
}

// BenchmarkFineToyBlockRunner: the iteration of 8 toys of 4 iterations
// at the fine grid without their draws, in one block (RunBlock) and one
// toy after another (the toy runner of each, both cores on its sweeps),
// interleaved rounds on the same pseudo-data; reports the medians per
// toy, their ratio and the ratio of a toy in the block to 4 marginal
// iterations of the nominal problem measured in the same rounds.
func BenchmarkFineToyBlockRunner(b *testing.B) {
	p := fineProblem(b)
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		b.Fatal(err)
	}
	ctx := context.Background()
	f0, err := (&Settings{Iterations: 4}).Fit(ctx, pr)
	if err != nil {
		b.Fatal(err)
	}
	f := f0.(*fit)
	rng := rand.New(rand.NewPCG(1, 2))
	n := make([][]float64, unfold.ToyBlock)
	for s := range n {
		n[s] = make([]float64, len(p.Data))
		for i, v := range p.Data {
			n[s][i] = math.Max(0, math.Round(v+math.Sqrt(v)*rng.NormFloat64()))
		}
	}
	br, one := f.NewToyBlockRunner(), f.NewToyRunner()
	it := newIterator(f.m, nil)
	it.noLL = true
	var tb, to, ti []time.Duration
	b.ResetTimer()
	for range b.N {
		t0 := time.Now()
		if _, err := br.RunBlock(ctx, n, nil, nil); err != nil {
			b.Fatal(err)
		}
		tb = append(tb, time.Since(t0)/unfold.ToyBlock)
		t0 = time.Now()
		for s := range n {
			if _, err := one.Run(ctx, n[s], nil); err != nil {
				b.Fatal(err)
			}
		}
		to = append(to, time.Since(t0)/unfold.ToyBlock)
		t0 = time.Now()
		if err := it.iterate(ctx, f.m.n, fixedIterations(4), nil, &Details{}); err != nil {
			b.Fatal(err)
		}
		ti = append(ti, time.Since(t0))
	}
	b.StopTimer()
	mb, mo, mi := median(tb), median(to), median(ti)
	b.ReportMetric(mb.Seconds()*1e3, "ms/toy-in-block")
	b.ReportMetric(mo.Seconds()*1e3, "ms/toy-alone")
	b.ReportMetric(float64(mb)/float64(mo), "block/alone")
	b.ReportMetric(float64(mb)/float64(mi), "toy-in-block/4-iterations")
}
