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
	truth  Locator
	axes   []int // per truth axis, the reco observable index
	cells  []diagCell
	splits []diagSplit // the truth edges reco bins straddle (diagCell.split)
}

// diagCell is what reco bin r tells about the truth bin of its events.
// With truth >= 0 and split == 0 the whole reco bin lies inside truth
// bin truth. With split != 0 the reco bin straddles one truth edge,
// splits[split-1], and lies inside one truth bin along every other axis:
// below the edge the truth bin is truth, at or above it truth + step.
// truth < 0: the event is located in the truth scheme (a reco bin across
// several truth bins or across an in-range and a flow truth bin,
// schemes that are not both *binning.Scheme, several truth regions).
type diagCell struct {
	truth, split int32
}

// diagSplit is one in-range edge of a truth axis: the reco observable
// that measures the axis, the edge, and the step in truth bins from the
// bin below it to the bin above.
type diagSplit struct {
	edge      float64
	obs, step int32
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

// stateMixed marks a reco axis bin across truth states that one
// comparison cannot tell apart.
const stateMixed = math.MinInt32

// axisCell is where one bin of a reco axis lies along a truth axis: in
// the truth state st (a bin number or binning.UnderflowBin,
// binning.OverflowBin), or (split) across truth bins st and st+1, or
// (st == stateMixed) across more.
type axisCell struct {
	st    int
	split bool
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

// fromAxes fills the cells of the bins of reco region r (in-range and
// flow), both regions being products of plain axes: along each truth
// axis a, each state of reco axis k[a] lies in one truth state or
// straddles one truth edge, and the truth bin of a reco bin is formed
// from its axes' states. Where the reco bin lies in one truth bin the
// result is the same as locating its corners, and where it straddles one
// in-range edge the same as locating the event.
func (m *diagMap) fromAxes(ts, rs *binning.Scheme, r int, k []int) {
	treg, rreg := ts.Regions()[0], rs.Regions()[r]
	d := len(k)
	tax, rax := treg.Axes(), rreg.Axes()
	// strides of the truth region's in-range cells, row-major, and the
	// split table: the in-range edges of each truth axis
	var stride, off [binning.MaxAxes]int
	s := 1
	for a := d - 1; a >= 0; a-- {
		stride[a] = s
		s *= tax[a].Bins(0)
	}
	if m.splits == nil {
		for a := range d {
			off[a] = len(m.splits)
			te := tax[a].Edges()
			for j := 1; j < len(te)-1; j++ {
				m.splits = append(m.splits, diagSplit{edge: te[j], obs: int32(m.axes[a]), step: int32(stride[a])})
			}
		}
	} else {
		for a := 1; a < d; a++ {
			off[a] = off[a-1] + tax[a-1].Bins(0) - 1
		}
	}
	// per truth axis a, the states of reco axis k[a] by bin number + 2
	// (overflow, underflow, bins)
	per := make([][]axisCell, d)
	for a := range d {
		te := tax[a].Edges()
		re := rax[k[a]].Edges()
		nb := len(re) - 1
		per[a] = make([]axisCell, nb+2)
		for i := -2; i < nb; i++ {
			var lo, hi float64
			switch i {
			case binning.OverflowBin:
				lo, hi = re[nb], math.Inf(1)
			case binning.UnderflowBin:
				lo, hi = math.Inf(-1), math.Nextafter(re[0], math.Inf(-1))
			default:
				lo, hi = re[i], math.Nextafter(re[i+1], math.Inf(-1))
			}
			sl, sh := truthState(te, lo), truthState(te, hi)
			c := &per[a][i+2]
			switch {
			case sl == sh:
				c.st = sl
			case sl >= 0 && sh == sl+1:
				c.st, c.split = sl, true
			default:
				c.st = stateMixed
			}
		}
	}
	// the reco region's extended cells in row-major order, the last
	// axis fastest: its in-range and its flow bins each come in this
	// order (binning's flattening order)
	nr := len(rax)
	var state, m1, u, n, idx [binning.MaxAxes]int
	for i, ax := range rax {
		n[i] = ax.Bins(0)
		if ax.Underflow() {
			u[i] = 1
		}
		m1[i] = n[i] + u[i]
		if ax.Overflow() {
			m1[i]++
		}
	}
	in, _ := rs.Span(r)
	flow, _ := rs.FlowSpan(r)
	var st [binning.MaxAxes]int
	for {
		inRange := true
		for i := range nr {
			switch j := state[i] - u[i]; {
			case j < 0:
				idx[i], inRange = binning.UnderflowBin, false
			case j >= n[i]:
				idx[i], inRange = binning.OverflowBin, false
			default:
				idx[i] = j
			}
		}
		g := in
		if inRange {
			in++
		} else {
			g = flow
			flow++
		}
		m.cells[g] = combine(ts, per, k, &idx, &st, &stride, &off)
		i := nr - 1
		for ; i >= 0; i-- {
			if state[i]++; state[i] < m1[i] {
				break
			}
			state[i] = 0
		}
		if i < 0 {
			return
		}
	}
}

// combine returns the cell of the reco bin with per-axis bin numbers idx.
func combine(ts *binning.Scheme, per [][]axisCell, k []int, idx, st, stride, off *[binning.MaxAxes]int) diagCell {
	out := diagCell{truth: -1}
	flow, split := false, -1
	t := 0
	for a := range per {
		c := &per[a][idx[k[a]]+2]
		switch {
		case c.st == stateMixed:
			return out
		case c.split:
			if split >= 0 {
				return out // straddles along two axes: located
			}
			split = a
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
		// the edge above truth state st: edge st+1 of the axis, entry
		// st of its in-range edges
		out.split = int32(off[split]+st[split]) + 1
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
