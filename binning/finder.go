package binning

import "math"

// finder locates values in one list of edges. It keeps a table of
// equal-width buckets over the edge range: a value in bucket b lies in one
// of the bins lut[b][0]..lut[b][1], and a short branch-free binary search
// over that range finds it. With two buckets per bin, equal-width edges
// need no comparison beyond the range check; any edges need at most
// O(log n) comparisons.
type finder struct {
	edges       []float64
	lut         [][2]int32 // per bucket: the bins of its first and last value
	first, last float64
	scale       float64 // buckets per unit
	n           int     // bins
}

func newFinder(edges []float64) finder {
	n := len(edges) - 1
	f := finder{edges: edges, first: edges[0], last: edges[n], n: n}
	k := 2 * n
	f.scale = float64(k) / (f.last - f.first)
	f.lut = make([][2]int32, k)
	clamp := func(i int) int32 { return int32(max(0, min(i, n-1))) }
	for b := range k {
		start := f.first + float64(b)/f.scale
		end := math.Nextafter(f.first+float64(b+1)/f.scale, math.Inf(-1))
		f.lut[b] = [2]int32{clamp(search(edges, start)), clamp(search(edges, end))}
	}
	return f
}

// find returns the bin of x: i with edges[i] <= x < edges[i+1], -1 below
// the first edge and n at or above the last. x must not be NaN.
func (f *finder) find(x float64) int {
	if x < f.first {
		return -1
	}
	if x >= f.last {
		return f.n
	}
	b := min(int((x-f.first)*f.scale), len(f.lut)-1)
	lo, hi := int(f.lut[b][0]), int(f.lut[b][1])
	e := f.edges
	if hi+1 >= len(e) || e[lo] > x || x >= e[hi+1] {
		// Rounding put x in a neighbouring bucket.
		return search(e, x)
	}
	// Largest i in lo..hi with e[i] <= x.
	for n := hi - lo + 1; n > 1; {
		half := n >> 1
		if e[lo+half] <= x {
			lo += half
		}
		n -= half
	}
	return lo
}
