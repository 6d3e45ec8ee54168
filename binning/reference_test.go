package binning

import (
	"math"
	"slices"
)

// This file holds a deliberately naive second implementation of the
// flattening and locating rules written down in doc.go, used as the
// oracle for the fast index arithmetic: it enumerates every bin of every
// region explicitly (row-major over the per-axis states, in-range bins
// first, then flow bins) and locates a point by a linear scan.

type refBin struct {
	region   int
	flow     bool
	idx      []int
	low, hig []float64
}

// refStates lists the states of axis k of reg given the state of the axis
// before it (ignored for a plain axis): underflow if on, the bins,
// overflow if on; AnyBin alone under a flow of the axis before an
// edges-by-bin axis.
func refStates(reg *Region, k, parent int) (states []int, edges []float64) {
	a := reg.axes[k]
	if a.byBin != nil {
		if parent < 0 {
			return []int{AnyBin}, nil
		}
		edges = a.byBin[parent]
	} else {
		edges = a.edges
	}
	if a.underflow {
		states = append(states, UnderflowBin)
	}
	for i := 0; i < len(edges)-1; i++ {
		states = append(states, i)
	}
	if a.overflow {
		states = append(states, OverflowBin)
	}
	return states, edges
}

func refInterval(i int, edges []float64) (float64, float64) {
	switch i {
	case AnyBin:
		return math.Inf(-1), math.Inf(1)
	case UnderflowBin:
		return math.Inf(-1), edges[0]
	case OverflowBin:
		return edges[len(edges)-1], math.Inf(1)
	}
	return edges[i], edges[i+1]
}

// refEnumerate returns all bins of reg in row-major state order.
func refEnumerate(reg *Region, r int) []refBin {
	var out []refBin
	d := len(reg.axes)
	var rec func(k int, idx []int, lo, hi []float64)
	rec = func(k int, idx []int, lo, hi []float64) {
		if k == d {
			flow := false
			for _, i := range idx {
				if i < 0 {
					flow = true
				}
			}
			out = append(out, refBin{region: r, flow: flow, idx: slices.Clone(idx), low: slices.Clone(lo), hig: slices.Clone(hi)})
			return
		}
		parent := 0
		if k > 0 {
			parent = idx[k-1]
		}
		states, edges := refStates(reg, k, parent)
		for _, s := range states {
			l, h := refInterval(s, edges)
			rec(k+1, append(idx, s), append(lo, l), append(hi, h))
		}
	}
	rec(0, nil, nil, nil)
	return out
}

// refFlatten returns the global bin list of s: in-range bins of all
// regions in order, then the flow bins of all regions in order.
func refFlatten(s *Scheme) []refBin {
	var in, flow []refBin
	for r, reg := range s.regions {
		for _, b := range refEnumerate(reg, r) {
			if b.flow {
				flow = append(flow, b)
			} else {
				in = append(in, b)
			}
		}
	}
	return append(in, flow...)
}

// refContains reports whether bin b holds the point x (scheme order).
func refContains(s *Scheme, b refBin, x []float64) bool {
	for k, a := range s.regions[b.region].axes {
		v := x[s.AxisIndex(a.name)]
		if math.IsNaN(v) {
			return false
		}
		if math.IsInf(b.hig[k], 1) { // overflow or AnyBin: +Inf included
			if v < b.low[k] {
				return false
			}
			continue
		}
		if v < b.low[k] || v >= b.hig[k] {
			return false
		}
	}
	return true
}

// refLocate applies the precedence rule by linear scans: the first region
// with an in-range bin containing x, else the first region with a flow bin
// containing x, else Outside.
func refLocate(s *Scheme, bins []refBin, x []float64) int {
	for _, v := range x {
		if math.IsNaN(v) {
			return Outside
		}
	}
	for _, flow := range []bool{false, true} {
		for r := range s.regions {
			for g, b := range bins {
				if b.region == r && b.flow == flow && refContains(s, b, x) {
					return g
				}
			}
		}
	}
	return Outside
}

// refNeighbour returns the neighbour of in-range bin g along axis k in
// direction dir by the rule in Scheme.Neighbours, by a linear scan.
func refNeighbour(s *Scheme, bins []refBin, g, k, dir int) int {
	b := bins[g]
	if b.flow {
		return -1
	}
	reg := s.regions[b.region]
	want := b.idx[k] + dir
	for h, c := range bins {
		if c.region != b.region || c.flow || c.idx[k] != want {
			continue
		}
		ok := true
		for j := range reg.axes {
			if j == k {
				continue
			}
			// An axis whose edges depend on axis k: contain b's centre.
			if j == k+1 && reg.axes[j].byBin != nil {
				mid := 0.5 * (b.low[j] + b.hig[j])
				if mid < c.low[j] || mid >= c.hig[j] {
					ok = false
				}
				continue
			}
			if c.idx[j] != b.idx[j] {
				ok = false
			}
		}
		if ok {
			return h
		}
	}
	return -1
}
