package binning

import "math"

// finder locates values in one list of edges.
//
// Edges of (nearly) equal widths are located by arithmetic: the estimate
// i = floor((x - first) * n / (last - first)) is corrected by comparing x
// with the edges of bin i. newFinder checks, with the same floating-point
// expression, that the estimate u_j of every edge j lies within 1/2 of j;
// as the expression does not decrease with x, the estimate of any x in
// bin j then lies in [j - 1/2, j + 3/2), so it is j - 1, j or j + 1 and one
// comparison on each side corrects it: the result is the edge search's
// for every x.
//
// Other edges use a table of equal-width buckets over the edge range: a
// value in bucket b lies in one of the bins lut[b][0]..lut[b][1], and a
// short branch-free binary search over that range finds it (at most
// O(log n) comparisons).
type finder struct {
	edges       []float64
	lut         [][2]int32 // per bucket: the bins of its first and last value; nil for equal widths
	first, last float64
	scale       float64 // buckets per unit, or bins per unit for equal widths
	n           int     // bins
}

func newFinder(edges []float64) finder {
	n := len(edges) - 1
	f := finder{edges: edges, first: edges[0], last: edges[n], n: n}
	if f.scale = float64(n) / (f.last - f.first); equalWidths(edges, f.scale) {
		return f
	}
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

// equalWidths reports whether the arithmetic estimate (x - edges[0]) *
// scale of every edge j lies within 1/2 of j (see finder).
func equalWidths(edges []float64, scale float64) bool {
	if !(scale > 0) || math.IsInf(scale, 0) {
		return false
	}
	for j, e := range edges {
		if u := (e - edges[0]) * scale; !(math.Abs(u-float64(j)) <= 0.5) {
			return false
		}
	}
	return true
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
	if f.lut == nil {
		// x - first >= 0, so the conversion rounds down; the estimate
		// is within one bin of the answer (see finder).
		e := f.edges
		i := min(int((x-f.first)*f.scale), f.n-1)
		if x < e[i] {
			return i - 1
		}
		if x >= e[i+1] {
			return i + 1
		}
		return i
	}
	// The bucket, clamped; with widths near the smallest or the largest
	// floats the product can be +Inf or NaN (0·Inf), which the clamp
	// sends to the last bucket and the check below to the search.
	b := len(f.lut) - 1
	if u := (x - f.first) * f.scale; u < float64(b) {
		b = int(u)
	}
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
