package sparse

import (
	"fmt"
	"math/rand/v2"
	"runtime"
	"runtime/metrics"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/desmear/desmear/sparse/sparsetest"
)

// The fine grid of the benchmarks: 500,000 truth × 1,000,000 reco bins,
// 20 non-zeros per column in a 3x3x4 neighbourhood (about 10^7 non-zeros).
var (
	fineOnce sync.Once
	fine     *Matrix
	fineErr  error
)

func fineMatrix(b *testing.B) *Matrix {
	fineOnce.Do(func() {
		fine, fineErr = banded3D([3]int{100, 100, 50}, [3]int{100, 100, 100}, [3]int{3, 3, 4}, 20, 1)
	})
	if fineErr != nil {
		b.Fatal(fineErr)
	}
	return fine
}

var (
	triadOnce sync.Once
	triadBuf  *sparsetest.Triad
)

// sameRunTriad measures the triad bandwidth over arrays as large as the
// matrix (each of nnz float64, 3×8 bytes per non-zero in all).
func sameRunTriad(b *testing.B, m *Matrix) float64 {
	triadOnce.Do(func() { triadBuf = sparsetest.NewTriad(m.NNZ()) })
	return triadBuf.Bandwidth(5)
}

// kernelBench runs one kernel per benchmark iteration and reports its
// time per non-zero, the bytes it must move (model), the same-run triad
// bandwidth (measured before and after the timed loop) and the ratio of
// the kernel's time to the bandwidth floor, model bytes / triad
// bandwidth.
func kernelBench(b *testing.B, modelBytes func(m *Matrix) float64, call func(m *Matrix)) {
	m := fineMatrix(b)
	call(m) // warm-up: workspaces and helper goroutines
	bw1 := sameRunTriad(b, m)
	b.ResetTimer()
	for b.Loop() {
		call(m)
	}
	b.StopTimer()
	bw := (bw1 + sameRunTriad(b, m)) / 2
	sec := b.Elapsed().Seconds() / float64(b.N)
	bytes := modelBytes(m)
	b.ReportMetric(sec*1e9/float64(m.NNZ()), "ns/nnz")
	b.ReportMetric(bytes/1e6, "MB-model/op")
	b.ReportMetric(bw/1e9, "triad-GB/s")
	b.ReportMetric(sec/(bytes/bw), "x-floor")
	b.ReportMetric(matrixBytes(m)/float64(m.NNZ()), "matrix-B/nnz")
}

// matrixBytes is one pass over the matrix: row indices and values (8
// bytes each per non-zero) and column pointers.
func matrixBytes(m *Matrix) float64 { return float64(16*m.NNZ() + 8*(m.cols+1)) }

// BenchmarkSweep is one iteration of D'Agostini/EM in fused form: gather
// g_j = (Aᵀ y)_j, x_j ← x_j g_j / ε_j, scatter into the next fold. Model
// bytes: one matrix pass, y read, next written, x read and written, ε
// read.
func BenchmarkSweep(b *testing.B) {
	m := fineMatrix(b)
	x, eps := make([]float64, m.cols), make([]float64, m.cols)
	m.ColSums(eps)
	for j := range x {
		x[j] = 1
	}
	y, next := make([]float64, m.rows), make([]float64, m.rows)
	for i := range y {
		y[i] = 1
	}
	update := func(j int, g float64) float64 {
		v := x[j] * g / eps[j]
		x[j] = v
		return v
	}
	kernelBench(b, func(m *Matrix) float64 {
		return matrixBytes(m) + 16*float64(m.rows) + 24*float64(m.cols)
	}, func(m *Matrix) { m.Sweep(next, y, update) })
}

// BenchmarkSweepRows is BenchmarkSweep with the per-row work of an EM
// iteration folded into the pass through the row hook: the ratio of data
// to the new fold, y' = n / next, into a second array. Model bytes: those
// of the sweep plus n read and y' written.
func BenchmarkSweepRows(b *testing.B) {
	m := fineMatrix(b)
	x, eps := make([]float64, m.cols), make([]float64, m.cols)
	m.ColSums(eps)
	for j := range x {
		x[j] = 1
	}
	y, next, data, y2 := make([]float64, m.rows), make([]float64, m.rows), make([]float64, m.rows), make([]float64, m.rows)
	for i := range y {
		y[i], data[i] = 1, 1
	}
	update := func(j int, g float64) float64 {
		v := x[j] * g / eps[j]
		x[j] = v
		return v
	}
	rows := func(r, lo, hi int) {
		nu, d, out := next[lo:hi], data[lo:hi], y2[lo:hi]
		d, out = d[:len(nu)], out[:len(nu)]
		for i, v := range nu {
			if v > 0 {
				out[i] = d[i] / v
			} else {
				out[i] = 0
			}
		}
	}
	kernelBench(b, func(m *Matrix) float64 {
		return matrixBytes(m) + 32*float64(m.rows) + 24*float64(m.cols)
	}, func(m *Matrix) { m.SweepRows(next, y, update, rows) })
}

// BenchmarkFold is dst = A x. Model bytes: one matrix pass, x read, dst
// written.
func BenchmarkFold(b *testing.B) {
	m := fineMatrix(b)
	x, dst := make([]float64, m.cols), make([]float64, m.rows)
	for j := range x {
		x[j] = 1
	}
	kernelBench(b, func(m *Matrix) float64 {
		return matrixBytes(m) + 8*float64(m.rows) + 8*float64(m.cols)
	}, func(m *Matrix) { m.Fold(dst, x) })
}

// BenchmarkBackProject is dst = Aᵀ y. Model bytes: one matrix pass, y
// read, dst written.
func BenchmarkBackProject(b *testing.B) {
	m := fineMatrix(b)
	y, dst := make([]float64, m.rows), make([]float64, m.cols)
	for i := range y {
		y[i] = 1
	}
	kernelBench(b, func(m *Matrix) float64 {
		return matrixBytes(m) + 8*float64(m.rows) + 8*float64(m.cols)
	}, func(m *Matrix) { m.BackProject(dst, y) })
}

// BenchmarkJamesBowmanTwoProducts is the baseline the fused sweep
// replaces: one EM iteration as two separate single-threaded
// james-bowman products on the same storage (CSC().MulVecTo, which adds
// into its destination, so the destinations are cleared first): a
// back-projection and a fold. Model bytes: two matrix passes and the
// vectors.
func BenchmarkJamesBowmanTwoProducts(b *testing.B) {
	m := fineMatrix(b)
	csc := m.CSC()
	x, g := make([]float64, m.cols), make([]float64, m.cols)
	y, next := make([]float64, m.rows), make([]float64, m.rows)
	for i := range y {
		y[i] = 1
	}
	for j := range x {
		x[j] = 1
	}
	kernelBench(b, func(m *Matrix) float64 {
		return 2*matrixBytes(m) + 16*float64(m.rows) + 24*float64(m.cols)
	}, func(m *Matrix) {
		clear(g)
		csc.MulVecTo(g, true, y)
		clear(next)
		csc.MulVecTo(next, false, x)
	})
}

// BenchmarkTriad reports the STREAM-like triad alone, for reference.
func BenchmarkTriad(b *testing.B) {
	sameRunTriad(b, fineMatrix(b)) // allocates the arrays once
	var bw float64
	for b.Loop() {
		bw = triadBuf.Bandwidth(1)
	}
	b.ReportMetric(bw/1e9, "GB/s")
}

// eventBatch generates batch s of a fictional detector simulation on the
// fine grid: events are drawn on the 100x100x50 truth grid (the third
// coordinate falling off as exp(-z/15), events beyond it dropped), 10%
// are lost (inefficiency), the others are smeared by up to ±2 bins per
// axis (triangular) onto the 100x100x100 reco grid (lost if they leave
// it). Weights are 0.8-1.2, 2% of them negative.
// Only reconstructed events become entries. The batch depends only on s.
func eventBatch(s uint64, events int, rows, cols []int32, w []float64) ([]int32, []int32, []float64) {
	rng := rand.New(rand.NewPCG(0x5eed, s))
	rows, cols, w = rows[:0], cols[:0], w[:0]
	for e := 0; e < events; e++ {
		u := rng.Uint64()
		ix, iy := int(u%100), int((u>>8)%100)
		iz := int(15 * rng.ExpFloat64())
		if iz > 49 || (u>>16)%10 == 0 {
			continue // beyond the truth grid, or not reconstructed
		}
		// Triangular smearing over -2..+2 bins (the sum of two 0..2).
		rx := ix + int((u>>20)%3) + int((u>>24)%3) - 2
		ry := iy + int((u>>28)%3) + int((u>>32)%3) - 2
		rz := 2*iz + int((u>>36)%2) + int((u>>40)%3) + int((u>>44)%3) - 2
		if rx < 0 || rx >= 100 || ry < 0 || ry >= 100 || rz < 0 || rz >= 100 {
			continue
		}
		wt := 0.8 + 0.4*float64((u>>48)&0xff)/255
		if (u>>56)%50 == 0 {
			wt = -wt
		}
		rows = append(rows, int32(rx+100*(ry+100*rz)))
		cols = append(cols, int32(ix+100*(iy+100*iz)))
		w = append(w, wt)
	}
	return rows, cols, w
}

// heapInUse returns the bytes of heap spans in use (objects and the
// unused part of in-use spans), HeapInuse of runtime.MemStats, read
// through runtime/metrics without stopping the world.
func heapInUse(s []metrics.Sample) uint64 {
	metrics.Read(s)
	return s[0].Value.Uint64() + s[1].Value.Uint64()
}

// BenchmarkAccumulate fills the fine grid from generated events on
// GOMAXPROCS goroutines (batches of 2^18 events numbered by position) and
// builds the matrix. The event generation is included in the time. It
// reports entries per second and the peak heap in use above the
// starting point, per distinct cell, sampled every 5 ms.
func BenchmarkAccumulate(b *testing.B) {
	for _, events := range []int{16 << 20, 48 << 20} {
		b.Run(map[int]string{16 << 20: "events=16M", 48 << 20: "events=48M"}[events], func(b *testing.B) {
			const batchEvents = 1 << 18
			nb := uint64((events + batchEvents - 1) / batchEvents)
			var entries int64
			var cells int
			var peakPerCell float64
			samples := []metrics.Sample{{Name: "/memory/classes/heap/objects:bytes"}, {Name: "/memory/classes/heap/unused:bytes"}}
			for b.Loop() {
				b.StopTimer()
				runtime.GC()
				base := heapInUse(samples)
				var peak atomic.Uint64
				stop := make(chan struct{})
				sampled := make(chan struct{})
				go func() {
					defer close(sampled)
					s := []metrics.Sample{{Name: samples[0].Name}, {Name: samples[1].Name}}
					tick := time.NewTicker(5 * time.Millisecond)
					defer tick.Stop()
					for {
						if h := heapInUse(s); h > peak.Load() {
							peak.Store(h)
						}
						select {
						case <-stop:
							return
						case <-tick.C:
						}
					}
				}()
				b.StartTimer()

				acc, err := NewAccumulator(1000000, 500000, nil)
				if err != nil {
					b.Fatal(err)
				}
				var next atomic.Uint64
				var wg sync.WaitGroup
				var failed atomic.Value
				for g := 0; g < runtime.GOMAXPROCS(0); g++ {
					wg.Add(1)
					go func() {
						defer wg.Done()
						var rows, cols []int32
						var w []float64
						for {
							s := next.Add(1) - 1
							if s >= nb {
								return
							}
							rows, cols, w = eventBatch(s, batchEvents, rows, cols, w)
							if err := acc.AddBatch(s, rows, cols, w); err != nil {
								failed.Store(err)
								return
							}
						}
					}()
				}
				wg.Wait()
				if err, ok := failed.Load().(error); ok {
					b.Fatal(err)
				}
				m, rep, err := acc.Matrix()
				if err != nil {
					b.Fatal(err)
				}
				b.StopTimer()
				if h := heapInUse(samples); h > peak.Load() {
					peak.Store(h)
				}
				close(stop)
				<-sampled
				entries, cells = rep.Entries, m.NNZ()
				peakPerCell = float64(peak.Load()-base) / float64(cells)
				runtime.KeepAlive(m)
				b.StartTimer()
			}
			sec := b.Elapsed().Seconds() / float64(b.N)
			b.ReportMetric(float64(entries)/sec/1e6, "Mentries/s")
			b.ReportMetric(float64(cells), "cells")
			b.ReportMetric(float64(entries), "entries")
			b.ReportMetric(peakPerCell, "peak-B/cell")
		})
	}
}

// BenchmarkSweepBlock compares one SweepBlock over 8 interleaved vectors
// with 8 Sweeps of one vector each, timed in the same loop (alternating),
// on the fine grid. Model bytes: one matrix pass per call plus, per
// vector, y read and next written; the 8 Sweeps read the matrix 8 times.
func BenchmarkSweepBlock(b *testing.B) {
	m := fineMatrix(b)
	const k = 8
	x := make([]float64, m.cols)
	for j := range x {
		x[j] = 0.5
	}
	yb, nb := make([]float64, k*m.rows), make([]float64, k*m.rows)
	for i := range yb {
		yb[i] = 1
	}
	ys, ns := make([][]float64, k), make([][]float64, k)
	for s := range ys {
		ys[s], ns[s] = make([]float64, m.rows), make([]float64, m.rows)
		for i := range ys[s] {
			ys[s][i] = 1
		}
	}
	updBlock := func(j int, g, out []float64) {
		for s := range out {
			out[s] = g[s] * x[j]
		}
	}
	upd := func(j int, g float64) float64 { return g * x[j] }
	m.SweepBlock(nb, yb, k, updBlock)
	bw1 := sameRunTriad(b, m)
	var tb, ts []float64
	b.ResetTimer()
	for b.Loop() {
		t0 := time.Now()
		m.SweepBlock(nb, yb, k, updBlock)
		tb = append(tb, time.Since(t0).Seconds())
		t0 = time.Now()
		for s := range ys {
			m.Sweep(ns[s], ys[s], upd)
		}
		ts = append(ts, time.Since(t0).Seconds())
	}
	b.StopTimer()
	bw := (bw1 + sameRunTriad(b, m)) / 2
	slices.Sort(tb)
	slices.Sort(ts)
	mb, ms := tb[len(tb)/2], ts[len(ts)/2]
	bytes := matrixBytes(m) + k*16*float64(m.rows)
	b.ReportMetric(mb*1e3, "ms/block8")
	b.ReportMetric(ms*1e3, "ms/8sweeps")
	b.ReportMetric(mb/ms, "block8/8sweeps")
	b.ReportMetric(bw/1e9, "triad-GB/s")
	b.ReportMetric(mb/(bytes/bw), "x-floor-block8")
}

// BenchmarkSweepBlockAssembly times the 8-vector SweepBlock on the fine
// grid through its assembly loop and through the Go loop (useAVX false),
// in turn in the same loop, and reports the medians over the rounds and
// the median of each round's ratio assembly / Go, of the wall times and
// of the process's CPU times (steadier when other processes take the
// cores).
func BenchmarkSweepBlockAssembly(b *testing.B) {
	if !useAVX {
		b.Skip("no assembly loop in this build")
	}
	defer func(old bool) { useAVX = old }(useAVX)
	m := fineMatrix(b)
	const k = 8
	x := make([]float64, m.cols)
	for j := range x {
		x[j] = 0.5
	}
	y, next := make([]float64, k*m.rows), make([]float64, k*m.rows)
	for i := range y {
		y[i] = 1
	}
	update := func(j int, g, out []float64) {
		for s := range out {
			out[s] = g[s] * x[j]
		}
	}
	m.SweepBlock(next, y, k, update)
	variants := []struct {
		name string
		asm  bool
	}{{"asm", true}, {"go", false}}
	t := make([][]float64, len(variants))
	r := make([][]float64, len(variants))
	rc := make([][]float64, len(variants)) // the same with CPU times
	b.ResetTimer()
	for b.Loop() {
		var d, dc [2]float64
		for v, c := range variants {
			useAVX = c.asm
			t0, c0 := time.Now(), cpuSeconds()
			m.SweepBlock(next, y, k, update)
			d[v], dc[v] = time.Since(t0).Seconds(), cpuSeconds()-c0
			t[v] = append(t[v], d[v])
		}
		for v := range variants {
			r[v] = append(r[v], d[v]/d[1])
			rc[v] = append(rc[v], dc[v]/dc[1])
		}
	}
	b.StopTimer()
	useAVX = true
	for v, c := range variants {
		slices.Sort(t[v])
		slices.Sort(r[v])
		slices.Sort(rc[v])
		b.ReportMetric(t[v][len(t[v])/2]*1e3, "ms/"+c.name)
		if v == 0 {
			b.ReportMetric(r[v][len(r[v])/2], c.name+"/go")
			if cpuSeconds() > 0 {
				b.ReportMetric(rc[v][len(rc[v])/2], c.name+"/go-cpu")
			}
		}
	}
}

// BenchmarkSweepPartition: the fused EM sweep of BenchmarkSweep over the
// fine grid with the fixed partition aimed at targetBlocks blocks and
// with partitions of 4x and 16x as many (smaller) blocks, in turn in the
// same loop, 10 sweeps each per round; reports the medians over the
// rounds and the medians of each round's ratio to the default. More
// blocks than goroutines let a goroutine whose core is taken by another
// process hold up less of a phase, at the price of more phase tasks.
func BenchmarkSweepPartition(b *testing.B) {
	m := fineMatrix(b)
	x, eps := make([]float64, m.cols), make([]float64, m.cols)
	m.ColSums(eps)
	y, next := make([]float64, m.rows), make([]float64, m.rows)
	for i := range y {
		y[i] = 1
	}
	update := func(j int, g float64) float64 {
		v := x[j] * g / eps[j]
		x[j] = v
		return v
	}
	factors := []int{1, 4, 16}
	ms := make([]*Matrix, len(factors))
	for k, f := range factors {
		c := *m
		c.part = newPartitionBlocks(m.rows, m.colPtr, m.rowIdx, minBlockNNZ/f, targetBlocks*f)
		ms[k] = &c
	}
	d := make([][]time.Duration, len(ms))
	r := make([][]float64, len(ms))
	b.ResetTimer()
	for range b.N {
		var t [3]time.Duration
		for range 10 {
			for k, c := range ms {
				for j := range x {
					x[j] = 1
				}
				t0 := time.Now()
				c.Sweep(next, y, update)
				t[k] += time.Since(t0)
			}
		}
		for k := range ms {
			d[k] = append(d[k], t[k]/10)
			r[k] = append(r[k], float64(t[k])/float64(t[0]))
		}
	}
	b.StopTimer()
	for k, f := range factors {
		slices.Sort(d[k])
		slices.Sort(r[k])
		b.ReportMetric(d[k][len(d[k])/2].Seconds()*1e3, fmt.Sprintf("ms/sweep-x%d-%dblocks", f, ms[k].part.blocks()))
		if f > 1 {
			b.ReportMetric(r[k][len(r[k])/2], fmt.Sprintf("x%d/default", f))
		}
	}
}

// BenchmarkSum merges the partial matrices of 10 shards of 2^20 events
// each (4 batches of eventBatch per shard) on the fine grid, as the
// response of 10 M events is merged from its shards.
func BenchmarkSum(b *testing.B) {
	const shards, perShard, batchEvents = 10, 4, 1 << 18
	ms := make([]*Matrix, shards)
	var in int
	for s := range ms {
		acc, err := NewAccumulator(1000000, 500000, nil)
		if err != nil {
			b.Fatal(err)
		}
		var rows, cols []int32
		var w []float64
		for k := range perShard {
			rows, cols, w = eventBatch(uint64(s*perShard+k), batchEvents, rows, cols, w)
			if err := acc.AddBatch(uint64(k), rows, cols, w); err != nil {
				b.Fatal(err)
			}
		}
		if ms[s], _, err = acc.Matrix(); err != nil {
			b.Fatal(err)
		}
		in += ms[s].NNZ()
	}
	var out int
	b.ResetTimer()
	for b.Loop() {
		m, err := Sum(ms...)
		if err != nil {
			b.Fatal(err)
		}
		out = m.NNZ()
	}
	b.ReportMetric(float64(in), "cells-in")
	b.ReportMetric(float64(out), "cells-out")
}
