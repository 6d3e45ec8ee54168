// Package parallel runs the element-wise passes and independent loops of
// the unfolding methods on several goroutines in a way whose results do
// not depend on the number of goroutines.
package parallel

import (
	"runtime"
	"sync"
	"sync/atomic"
)

// ChunkLen is the length of the fixed chunks of the element-wise passes.
// Chunk boundaries depend only on the vector length, and partial sums are
// combined in chunk order, so results do not depend on the number of
// goroutines.
const ChunkLen = 1 << 15

// Reducer runs element-wise passes over fixed chunks on up to GOMAXPROCS
// goroutines and sums up to four per-chunk partial results in chunk
// order. The zero value is ready to use; a Reducer keeps its scratch
// between calls and must not be used by two goroutines at once.
type Reducer struct {
	parts [][4]float64
}

// Run calls f for the chunks of [0, n) and returns the sums of the four
// partial results, added in chunk order.
func (r *Reducer) Run(n int, f func(lo, hi int, acc *[4]float64)) [4]float64 {
	nc := (n + ChunkLen - 1) / ChunkLen
	if cap(r.parts) < nc {
		r.parts = make([][4]float64, nc)
	}
	parts := r.parts[:nc]
	For(nc, runtime.GOMAXPROCS(0), func(c int) {
		parts[c] = [4]float64{}
		f(c*ChunkLen, min(n, (c+1)*ChunkLen), &parts[c])
	})
	var s [4]float64
	for _, p := range parts {
		for k := range s {
			s[k] += p[k]
		}
	}
	return s
}

// For calls f(i) for i in [0,n) on up to workers goroutines; the calls
// must be independent.
func For(n, workers int, f func(i int)) {
	workers = min(workers, n)
	if workers <= 1 {
		for i := 0; i < n; i++ {
			f(i)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1) - 1)
				if i >= n {
					return
				}
				f(i)
			}
		}()
	}
	wg.Wait()
}
