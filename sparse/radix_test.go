package sparse

import (
	"math/rand/v2"
	"slices"
	"testing"
)

// TestRadixSortStable compares the radix sort with the standard
// library's stable sort (slices.SortStableFunc) on keys of several
// widths, with many equal keys whose weights record the input order.
func TestRadixSortStable(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	for _, n := range []int{0, 1, 2, 100, msdMinLen - 1, msdMinLen, 3*msdMinLen + 17} {
		for _, bits := range []uint{1, 5, 11, 22, 23, 39, 62} {
			k0 := make([]uint64, n)
			w0 := make([]float64, n)
			distinct := max(1, n/4)
			pool := make([]uint64, distinct)
			for i := range pool {
				pool[i] = rng.Uint64() & (1<<bits - 1)
			}
			for i := range k0 {
				k0[i] = pool[rng.IntN(distinct)]
				w0[i] = float64(i)
			}
			type pair struct {
				k uint64
				w float64
			}
			want := make([]pair, n)
			for i := range want {
				want[i] = pair{k0[i], w0[i]}
			}
			slices.SortStableFunc(want, func(a, b pair) int {
				switch {
				case a.k < b.k:
					return -1
				case a.k > b.k:
					return 1
				}
				return 0
			})
			var s radixSorter
			k, w := s.sort(k0, w0, make([]uint64, n), make([]float64, n), bits)
			for i := range want {
				if k[i] != want[i].k || w[i] != want[i].w {
					t.Fatalf("n=%d bits=%d: position %d holds (%d, %v), want (%d, %v)", n, bits, i, k[i], w[i], want[i].k, want[i].w)
				}
			}
		}
	}
}
