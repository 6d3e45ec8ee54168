package binning

import (
	"errors"
	"fmt"
	"math"
	"slices"
)

// Axis is one observable of a region: a name, an optional unit, strictly
// increasing finite bin edges and switchable underflow and overflow bins.
//
// The edges are either one list for the whole axis (a plain axis) or, for
// an axis that is not the first of its region, one list per bin of the
// axis before it (an edges-by-bin axis, for example a different
// transverse-momentum binning in each rapidity slice). An Axis is
// immutable once made.
type Axis struct {
	name, unit          string
	edges               []float64   // plain axis
	byBin               [][]float64 // edges-by-bin axis: one list per bin of the axis before
	underflow, overflow bool
}

// NewAxis returns a plain axis with the given edges. The edges are copied.
// It returns an error if the name is empty, there are fewer than two
// edges, or the edges are not finite and strictly increasing.
func NewAxis(name, unit string, edges []float64, underflow, overflow bool) (*Axis, error) {
	if name == "" {
		return nil, errors.New("binning: axis without a name")
	}
	if err := checkEdges(edges); err != nil {
		return nil, fmt.Errorf("binning: axis %q: %w", name, err)
	}
	return &Axis{name: name, unit: unit, edges: slices.Clone(edges), underflow: underflow, overflow: overflow}, nil
}

// NewAxisByBin returns an edges-by-bin axis: edgesByBin[i] are the edges
// used when the axis before it in the region is in its bin i. The number
// of lists must equal the number of bins of that axis; NewRegion checks
// this. Underflow and overflow apply in every slice. The lists are copied.
func NewAxisByBin(name, unit string, edgesByBin [][]float64, underflow, overflow bool) (*Axis, error) {
	if name == "" {
		return nil, errors.New("binning: axis without a name")
	}
	if len(edgesByBin) == 0 {
		return nil, fmt.Errorf("binning: axis %q: no edge lists", name)
	}
	by := make([][]float64, len(edgesByBin))
	for i, e := range edgesByBin {
		if err := checkEdges(e); err != nil {
			return nil, fmt.Errorf("binning: axis %q, edge list %d: %w", name, i, err)
		}
		by[i] = slices.Clone(e)
	}
	return &Axis{name: name, unit: unit, byBin: by, underflow: underflow, overflow: overflow}, nil
}

// checkEdges reports whether edges are at least two finite, strictly
// increasing values.
func checkEdges(edges []float64) error {
	if len(edges) < 2 {
		return fmt.Errorf("%d edge(s); an axis needs at least two edges (one bin)", len(edges))
	}
	for i, e := range edges {
		if math.IsNaN(e) || math.IsInf(e, 0) {
			return fmt.Errorf("edge %d is %v; edges must be finite numbers", i, e)
		}
		if i > 0 && !(e > edges[i-1]) {
			return fmt.Errorf("edges not strictly increasing: edge %d (%v) follows %v", i, e, edges[i-1])
		}
	}
	return nil
}

// Name returns the axis name.
func (a *Axis) Name() string { return a.name }

// Unit returns the unit, possibly empty.
func (a *Axis) Unit() string { return a.unit }

// Underflow reports whether the underflow bin is switched on.
func (a *Axis) Underflow() bool { return a.underflow }

// Overflow reports whether the overflow bin is switched on.
func (a *Axis) Overflow() bool { return a.overflow }

// ByBin reports whether the axis has edges by bin of the axis before it.
func (a *Axis) ByBin() bool { return a.byBin != nil }

// Edges returns the edges of a plain axis, or nil for an edges-by-bin
// axis. The returned slice must not be modified.
func (a *Axis) Edges() []float64 { return a.edges }

// EdgesByBin returns the edge lists of an edges-by-bin axis, one per bin
// of the axis before it, or nil for a plain axis. The returned slices must
// not be modified.
func (a *Axis) EdgesByBin() [][]float64 { return a.byBin }

// EdgesIn returns the edges used when the axis before it is in bin outer.
// For a plain axis outer is ignored. It panics if outer is out of range for
// an edges-by-bin axis. The returned slice must not be modified.
func (a *Axis) EdgesIn(outer int) []float64 {
	if a.byBin == nil {
		return a.edges
	}
	return a.byBin[outer]
}

// Bins returns the number of in-range bins when the axis before it is in
// bin outer (outer is ignored for a plain axis).
func (a *Axis) Bins(outer int) int { return len(a.EdgesIn(outer)) - 1 }

// flows returns the number of switched-on flow bins (0, 1 or 2).
func (a *Axis) flows() int {
	n := 0
	if a.underflow {
		n++
	}
	if a.overflow {
		n++
	}
	return n
}

// search returns the bin of x in edges: i with edges[i] <= x < edges[i+1],
// -1 below the first edge and len(edges)-1 at or above the last edge. A
// value on an edge belongs to the bin above it. x must not be NaN.
func search(edges []float64, x float64) int {
	last := len(edges) - 1
	if x < edges[0] {
		return -1
	}
	if x >= edges[last] {
		return last
	}
	// Branch-free binary search for the largest lo with edges[lo] <= x,
	// among edges[0:last] (edges[0] <= x < edges[last] holds).
	lo, n := 0, last
	for n > 1 {
		half := n >> 1
		if edges[lo+half] <= x {
			lo += half
		}
		n -= half
	}
	return lo
}
