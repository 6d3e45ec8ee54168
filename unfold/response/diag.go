package response

import (
	"math"

	"github.com/desmear/desmear/binning"
)

// diagMap locates reco observables in the truth scheme (for purity and
// stability) without a search where the reco bin tells the answer:
// cells[r] says, for the events located in reco bin r, in which truth
// bin their reco observables lie.
type diagMap struct {
	truth Locator
	axes  []int // per truth axis, the reco observable index
	cells []diagCell
}

// diagCell is what reco bin r tells about the truth bin of its events.
// With truth >= 0 and split == 0 the whole reco bin lies inside truth
// bin truth. With split != 0 the reco bin straddles one truth edge, edge,
// along truth axis split&15 (and lies inside one truth bin along every
// other axis): below the edge the truth bin is truth, at or above it
// truth + split>>4. truth < 0: the event is located in the truth scheme
// (a flow bin of the reco scheme, a reco bin across several truth bins or
// a truth flow boundary, schemes that are not both *binning.Scheme).
type diagCell struct {
	edge  float64
	truth int32
	split uint32
}

// diagFor returns the diagMap of the Builder's schemes for the reco
// observables axes, made once and kept for the samples that follow.
func (b *Builder) diagFor(axes []int) *diagMap {
	if m := b.diag; m != nil && len(m.axes) == len(axes) {
		same := true
		for i, a := range axes {
			same = same && m.axes[i] == a
		}
		if same {
			return m
		}
	}
	b.diag = newDiagMap(b.truth, b.reco, axes)
	return b.diag
}

func newDiagMap(truth, reco Locator, axes []int) *diagMap {
	m := &diagMap{truth: truth, axes: append([]int(nil), axes...), cells: make([]diagCell, reco.Len())}
	for i := range m.cells {
		m.cells[i].truth = -1
	}
	ts, ok1 := truth.(*binning.Scheme)
	rs, ok2 := reco.(*binning.Scheme)
	// With several truth regions a reco bin whose corners fall in one
	// truth bin could still overlap an earlier region inside: locate.
	if !ok1 || !ok2 || len(ts.Regions()) != 1 || len(axes) > binning.MaxAxes {
		return m
	}
	names := rs.AxisNames()
	for r, reg := range rs.Regions() {
		// k[a]: the axis of the reco region measuring truth axis a.
		var k [binning.MaxAxes]int
		ok := true
		for a, ax := range axes {
			k[a] = -1
			for i, ra := range reg.Axes() {
				if ra.Name() == names[ax] {
					k[a] = i
				}
			}
			ok = ok && k[a] >= 0
		}
		if !ok {
			continue // the events of this region are located
		}
		if ts.Regions()[0].Rectangular() && reg.Rectangular() {
			m.fromAxes(ts, rs, r, k[:len(axes)])
		} else {
			m.fromCorners(ts, rs, r, k[:len(axes)])
		}
	}
	return m
}

// Per-axis states of a reco axis bin in a truth axis.
const (
	stateMixed = math.MinInt32 // across two truth states not split below
)

// axisCell is where one bin of a reco axis lies along a truth axis: in
// the truth state st (a bin number or binning.UnderflowBin,
// binning.OverflowBin), or across truth bins st and st+1 split at edge,
// or (st == stateMixed) across more.
type axisCell struct {
	st    int
	split bool
	edge  float64
}

// truthState returns the state of the value x along a plain truth axis
// with the given edges: its bin, or UnderflowBin or OverflowBin (switched
// on or not; Scheme.Global decides).
func truthState(edges []float64, x float64) int {
	switch {
	case x < edges[0]:
		return binning.UnderflowBin
	case x >= edges[len(edges)-1]:
		return binning.OverflowBin
	}
	lo, hi := 0, len(edges)-1 // edges[lo] <= x < edges[hi]
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if edges[mid] <= x {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}

// fromAxes fills the cells of the in-range bins of reco region r, both
// regions being products of plain axes: along each truth axis a, each
// bin of reco axis k[a] lies in one truth state or straddles one truth
// edge, and the truth bin of a reco bin is formed from its axes' states.
// The result is the same as locating the corners of every reco bin.
func (m *diagMap) fromAxes(ts, rs *binning.Scheme, r int, k []int) {
	treg, rreg := ts.Regions()[0], rs.Regions()[r]
	d := len(k)
	tax := treg.Axes()
	per := make([][]axisCell, d)
	for a := range d {
		te := tax[a].Edges()
		re := rreg.Axes()[k[a]].Edges()
		per[a] = make([]axisCell, len(re)-1)
		for i := range per[a] {
			lo, hi := re[i], math.Nextafter(re[i+1], math.Inf(-1))
			sl, sh := truthState(te, lo), truthState(te, hi)
			c := &per[a][i]
			switch {
			case sl == sh:
				c.st = sl
			case sl >= 0 && sh == sl+1:
				c.st, c.split, c.edge = sl, true, te[sh]
			default:
				c.st = stateMixed
			}
		}
	}
	// strides of the truth region's in-range cells, row-major
	var stride [binning.MaxAxes]int
	s := 1
	for a := d - 1; a >= 0; a-- {
		stride[a] = s
		s *= tax[a].Bins(0)
	}
	// the reco region's axes, row-major, the last fastest
	rax := rreg.Axes()
	nr := len(rax)
	var idx, n [binning.MaxAxes]int
	for i, ax := range rax {
		n[i] = ax.Bins(0)
	}
	var st [binning.MaxAxes]int
	lo, hi := rs.Span(r)
	for g := lo; g < hi; g++ {
		m.cells[g] = combine(ts, per, k, &idx, &st, &stride)
		for i := nr - 1; i >= 0; i-- {
			if idx[i]++; idx[i] < n[i] {
				break
			}
			idx[i] = 0
		}
	}
}

// combine returns the cell of the reco bin with per-axis bin numbers idx.
func combine(ts *binning.Scheme, per [][]axisCell, k []int, idx, st, stride *[binning.MaxAxes]int) diagCell {
	out := diagCell{truth: -1}
	flow, split := false, -1
	t := 0
	for a := range per {
		c := &per[a][idx[k[a]]]
		switch {
		case c.st == stateMixed:
			return out
		case c.split:
			if split >= 0 {
				return out // straddles along two axes: located
			}
			split = a
			out.edge = c.edge
		}
		st[a] = c.st
		if c.st < 0 {
			flow = true
		}
		t += c.st * stride[a]
	}
	if flow {
		if split >= 0 {
			return out
		}
		t = ts.Global(0, st[:len(per)]...)
		if t < 0 {
			return out // a switched-off truth flow: located (Outside)
		}
	}
	out.truth = int32(t)
	if split >= 0 {
		out.split = uint32(stride[split])<<4 | uint32(split)
	}
	return out
}

// fromCorners fills the cells of the in-range bins of reco region r by
// locating the corners of each reco bin in the truth scheme (for regions
// with edges-by-bin axes).
func (m *diagMap) fromCorners(ts, rs *binning.Scheme, r int, k []int) {
	d := len(k)
	var lo, hi, corner [binning.MaxAxes]float64
	first, end := rs.Span(r)
	for g := first; g < end; g++ {
		bin := rs.Bin(g)
		for a := range d {
			lo[a], hi[a] = bin.Low[k[a]], math.Nextafter(bin.High[k[a]], math.Inf(-1))
		}
		// Truth bins are boxes: the reco box lies in one of them when
		// all its corners do (the upper edges are excluded, hence the
		// largest value below each upper edge).
		t, ok := -2, true
		for c := 0; c < 1<<d && ok; c++ {
			for a := range d {
				if c&(1<<a) != 0 {
					corner[a] = hi[a]
				} else {
					corner[a] = lo[a]
				}
			}
			u := ts.Locate(corner[:d])
			if u < 0 || (t != -2 && u != t) {
				ok = false
			}
			t = u
		}
		if ok {
			m.cells[g].truth = int32(t)
		}
	}
}
