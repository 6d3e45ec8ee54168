package unfold

import (
	"runtime"
	"sync"
	"sync/atomic"

	"gonum.org/v1/gonum/floats"
)

// chunkLen is the length of the fixed chunks of the element-wise passes.
// Chunk boundaries depend only on the vector length, and partial sums are
// combined in chunk order, so results do not depend on the number of
// goroutines.
const chunkLen = 1 << 15

// reducer runs element-wise passes over fixed chunks on up to GOMAXPROCS
// goroutines and sums up to four per-chunk partial results in chunk
// order.
type reducer struct {
	parts [][4]float64
}

func (r *reducer) run(n int, f func(lo, hi int, acc *[4]float64)) [4]float64 {
	nc := (n + chunkLen - 1) / chunkLen
	if cap(r.parts) < nc {
		r.parts = make([][4]float64, nc)
	}
	parts := r.parts[:nc]
	forEach(nc, runtime.GOMAXPROCS(0), func(c int) {
		parts[c] = [4]float64{}
		f(c*chunkLen, min(n, (c+1)*chunkLen), &parts[c])
	})
	var s [4]float64
	for _, p := range parts {
		for k := range s {
			s[k] += p[k]
		}
	}
	return s
}

// forEach calls f(i) for i in [0,n) on up to workers goroutines; the
// calls must be independent.
func forEach(n, workers int, f func(i int)) {
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

// axpy computes dst += alpha·x.
func axpy(dst []float64, alpha float64, x []float64) { floats.AddScaled(dst, alpha, x) }
