package sparse

import (
	"math/rand/v2"
	"testing"
)

func BenchmarkRadixSort(b *testing.B) {
	for _, n := range []int{1 << 18, 1 << 20, 1 << 21} {
		b.Run(map[int]string{1 << 18: "256k", 1 << 20: "1M", 1 << 21: "2M"}[n], func(b *testing.B) {
			rng := rand.New(rand.NewPCG(1, 2))
			src := make([]uint64, n)
			for i := range src {
				src[i] = uint64(rng.IntN(500000))<<20 | uint64(rng.IntN(1000000))
			}
			k0, w0, k1, w1 := make([]uint64, n), make([]float64, n), make([]uint64, n), make([]float64, n)
			var s radixSorter
			for b.Loop() {
				copy(k0, src)
				s.sort(k0, w0, k1, w1, 39)
			}
			b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(n), "ns/entry")
		})
	}
}
