package sparsetest

import (
	"runtime"
	"slices"
	"sync"
	"time"
)

// Triad is the memory-bandwidth yardstick of the kernel benchmarks: a
// STREAM-like triad a = b + 3c over three arrays of float64 on GOMAXPROCS
// goroutines (McCalpin, IEEE TCCA Newsletter, 1995).
type Triad struct{ a, b, c []float64 }

// NewTriad allocates the three arrays of n elements and touches every
// page (an untouched page would be read from the kernel's zero page).
func NewTriad(n int) *Triad {
	t := &Triad{make([]float64, n), make([]float64, n), make([]float64, n)}
	for i := range t.b {
		t.a[i], t.b[i], t.c[i] = 1, 2, 3
	}
	return t
}

// Bandwidth returns the median bandwidth of reps triads in bytes per
// second by STREAM's counting (24 bytes per element, write-allocate not
// counted).
func (t *Triad) Bandwidth(reps int) float64 {
	g := runtime.GOMAXPROCS(0)
	n := len(t.a)
	times := make([]float64, reps)
	for rep := range times {
		start := time.Now()
		var wg sync.WaitGroup
		for k := 0; k < g; k++ {
			lo, hi := k*n/g, (k+1)*n/g
			wg.Add(1)
			go func() {
				defer wg.Done()
				a, b, c := t.a[lo:hi], t.b[lo:hi], t.c[lo:hi]
				b, c = b[:len(a)], c[:len(a)]
				for i := range a {
					a[i] = b[i] + 3*c[i]
				}
			}()
		}
		wg.Wait()
		times[rep] = time.Since(start).Seconds()
	}
	slices.Sort(times)
	return 24 * float64(n) / times[reps/2]
}
