package binning

import (
	"errors"
	"fmt"
	"slices"
	"sort"
)

// MaxAxes is the largest number of axes a region may have.
const MaxAxes = 8

// MaxBins is the largest number of bins, flow bins included, that a
// region or a scheme may have.
const MaxBins = 1 << 27

// Special per-axis bin numbers in Bin.Index and for Scheme.Global.
const (
	UnderflowBin = -1 // the underflow bin of the axis
	OverflowBin  = -2 // the overflow bin of the axis
	AnyBin       = -3 // a nested axis collapsed under a flow of the axis before it: all values
)

// Region is a named grid of 1 to MaxAxes axes. Its in-range bins are
// numbered row-major (last axis fastest); an edges-by-bin axis has as many
// bins in each slice as its edge list for that slice gives. Its flow bins
// are numbered in the same row-major order over the extended grid in which
// every axis has the states underflow (if on), its bins, overflow (if on),
// skipping the in-range cells; an edges-by-bin axis under a flow of the
// axis before it has the single state AnyBin. A Region is immutable.
type Region struct {
	name    string
	axes    []*Axis
	lv      []level
	nIn     int     // in-range cells
	nExt    int     // extended cells (in-range and flow)
	flowExt []int32 // extended index of each flow cell, increasing
	ident   []int   // 0..len(axes)-1
	rect    bool    // no edges-by-bin axis
}

// level holds the layout of one axis of a region.
type level struct {
	nested bool
	u      int       // 1 if the underflow is on
	edges  []float64 // plain axis
	find   finder    // plain axis
	finds  []finder  // nested axis: one per edge list
	n      int       // plain: bins
	m      int       // plain: extended states n+u+o
	// nested axis: cum[i] is the number of in-range bins in the slices
	// before bin i of the axis before, cumExt[s] the number of extended
	// states before extended state s of the axis before.
	cum, cumExt []int
}

func (l *level) total() int    { return l.cum[len(l.cum)-1] }
func (l *level) totalExt() int { return l.cumExt[len(l.cumExt)-1] }

// NewRegion returns a region with the given axes, in order. It returns an
// error if the name is empty, there are no axes or more than MaxAxes, two
// axes share a name, the first axis has edges by bin, an edges-by-bin
// axis follows another edges-by-bin axis, or the number of edge lists of
// an edges-by-bin axis differs from the number of bins of the axis before.
func NewRegion(name string, axes ...*Axis) (*Region, error) {
	if name == "" {
		return nil, errors.New("binning: region without a name")
	}
	if len(axes) == 0 {
		return nil, fmt.Errorf("binning: region %q has no axes", name)
	}
	if len(axes) > MaxAxes {
		return nil, fmt.Errorf("binning: region %q has %d axes; at most %d are supported", name, len(axes), MaxAxes)
	}
	for k, a := range axes {
		if a == nil || a.byBin == nil && len(a.edges) < 2 {
			return nil, fmt.Errorf("binning: region %q: axis %d is nil or was not made by NewAxis or NewAxisByBin", name, k)
		}
		for _, b := range axes[:k] {
			if a.name == b.name {
				return nil, fmt.Errorf("binning: region %q: axis name %q used twice", name, a.name)
			}
		}
		if !a.ByBin() {
			continue
		}
		if k == 0 {
			return nil, fmt.Errorf("binning: region %q: the first axis %q cannot have edges by bin; there is no axis before it", name, a.name)
		}
		p := axes[k-1]
		if p.ByBin() {
			return nil, fmt.Errorf("binning: region %q: axis %q has edges by bin of %q, which itself has edges by bin; only an axis with plain edges may be followed by an edges-by-bin axis", name, a.name, p.name)
		}
		if len(a.byBin) != len(p.edges)-1 {
			return nil, fmt.Errorf("binning: region %q: axis %q has %d edge lists but the axis before it (%q) has %d bins; give one list per bin", name, a.name, len(a.byBin), p.name, len(p.edges)-1)
		}
	}
	if n := extendedCells(axes); n > MaxBins {
		return nil, fmt.Errorf("binning: region %q has %.4g bins (flow bins included); at most %d are supported", name, n, MaxBins)
	}
	r := &Region{name: name, axes: append([]*Axis(nil), axes...)}
	r.layout()
	return r, nil
}

// extendedCells returns the number of in-range and flow cells of a
// region with the given (valid) axes, as a float64 so that it cannot
// overflow.
func extendedCells(axes []*Axis) float64 {
	n := 1.0
	for k, a := range axes {
		if !a.ByBin() {
			n *= float64(len(a.edges) - 1 + a.flows())
			continue
		}
		p := axes[k-1]
		t := float64(p.flows()) // collapsed under the flows of the axis before
		for _, e := range a.byBin {
			t += float64(len(e) - 1 + a.flows())
		}
		n = n / float64(len(p.edges)-1+p.flows()) * t
	}
	return n
}

// layout fills the level tables, the in-range and extended cell counts and
// the list of flow cells.
func (r *Region) layout() {
	d := len(r.axes)
	r.lv = make([]level, d)
	r.ident = make([]int, d)
	nIn, nExt := 1, 1
	r.rect = true
	for k, a := range r.axes {
		r.ident[k] = k
		l := &r.lv[k]
		if a.underflow {
			l.u = 1
		}
		if !a.ByBin() {
			l.edges = a.edges
			l.find = newFinder(a.edges)
			l.n = len(a.edges) - 1
			l.m = l.n + a.flows()
			nIn *= l.n
			nExt *= l.m
			continue
		}
		l.nested = true
		r.rect = false
		p := &r.lv[k-1]
		l.cum = make([]int, p.n+1)
		l.finds = make([]finder, len(a.byBin))
		for i, e := range a.byBin {
			l.finds[i] = newFinder(e)
			l.cum[i+1] = l.cum[i] + len(e) - 1
		}
		l.cumExt = make([]int, p.m+1)
		for s := 0; s < p.m; s++ {
			cnt := 1 // a flow state of the axis before: this axis collapses to AnyBin
			if i := s - p.u; i >= 0 && i < p.n {
				cnt = len(a.byBin[i]) - 1 + a.flows()
			}
			l.cumExt[s+1] = l.cumExt[s] + cnt
		}
		nIn = nIn / p.n * l.total()
		nExt = nExt / p.m * l.totalExt()
	}
	r.nIn, r.nExt = nIn, nExt
	r.flowExt = make([]int32, 0, nExt-nIn)
	r.listFlows(0, 0, 0, 0, false)
}

// listFlows appends the extended indices of the flow cells below the
// extended cell e of level k-1 (e2 is its parent cell, sp its state on
// axis k-1) to r.flowExt, in increasing order. flow says whether an axis
// before k is already in a flow state. It visits the cells of all levels
// but the last, so it costs about the number of cells divided by the bins
// of the last axis.
func (r *Region) listFlows(k, e, e2, sp int, flow bool) {
	l := &r.lv[k]
	var base, cnt, u, n int
	if l.nested {
		p := &r.lv[k-1]
		base = e2*l.totalExt() + l.cumExt[sp]
		cnt = l.cumExt[sp+1] - l.cumExt[sp]
		u, n = 0, -1 // collapsed under a flow of the axis before: AnyBin
		if ip := sp - p.u; ip >= 0 && ip < p.n {
			u, n = l.u, len(r.axes[k].byBin[ip])-1
		}
	} else {
		base, cnt, u, n = e*l.m, l.m, l.u, l.n
	}
	for s := 0; s < cnt; s++ {
		f := flow || s < u || s-u >= n
		if k == len(r.lv)-1 {
			if f {
				r.flowExt = append(r.flowExt, int32(base+s))
			}
			continue
		}
		r.listFlows(k+1, base+s, e, s, f)
	}
}

// Name returns the region name.
func (r *Region) Name() string { return r.name }

// Axes returns the axes of the region in order. The slice must not be
// modified.
func (r *Region) Axes() []*Axis { return r.axes }

// Len returns the number of in-range bins of the region.
func (r *Region) Len() int { return r.nIn }

// Flows returns the number of switched-on flow bins of the region.
func (r *Region) Flows() int { return len(r.flowExt) }

// Rectangular reports whether no axis of the region has edges by bin, so
// that its bins form a full grid (as a ROOT TH1D/TH2D/TH3D would).
func (r *Region) Rectangular() bool { return r.rect }

// find returns the in-range cell of the point whose coordinate on axis k
// is x[pos[k]], or -1 if it is outside the in-range bins (see findFlow).
// No coordinate may be NaN.
func (r *Region) find(x []float64, pos []int) int {
	if r.rect {
		c := 0
		for k := range r.lv {
			l := &r.lv[k]
			i := l.find.find(x[pos[k]])
			if uint(i) >= uint(l.n) {
				return -1
			}
			c = c*l.n + i
		}
		return c
	}
	c, q, ip := 0, 0, 0
	for k := range r.lv {
		l := &r.lv[k]
		v := x[pos[k]]
		if l.nested {
			f := &l.finds[ip]
			i := f.find(v)
			if i < 0 || i >= f.n {
				return -1
			}
			c = q*l.total() + l.cum[ip] + i
			ip = i
			continue
		}
		i := l.find.find(v)
		if i < 0 || i >= l.n {
			return -1
		}
		q = c
		c = c*l.n + i
		ip = i
	}
	return c
}

// findFlow returns the position in the flow list of the point, known to
// be outside the in-range bins, or -1 if its flow bin is switched off.
func (r *Region) findFlow(x []float64, pos []int) int {
	if r.rect {
		return r.findFlowRect(x, pos)
	}
	e, qe, sp := 0, 0, 0
	for k := range r.lv {
		l := &r.lv[k]
		a := r.axes[k]
		if l.nested {
			p := &r.lv[k-1]
			s := 0
			if ip := sp - p.u; ip >= 0 && ip < p.n {
				edges := a.byBin[ip]
				i := search(edges, x[pos[k]])
				var ok bool
				if s, ok = flowState(i, len(edges)-1, a); !ok {
					return -1
				}
			}
			e = qe*l.totalExt() + l.cumExt[sp] + s
			sp = s
			continue
		}
		i := search(l.edges, x[pos[k]])
		s, ok := flowState(i, l.n, a)
		if !ok {
			return -1
		}
		qe = e
		e = e*l.m + s
		sp = s
	}
	return r.flowPos(e)
}

// findFlowRect is findFlow for a region without edges-by-bin axes: the
// position in the flow list of extended cell e is e less the number of
// in-range cells before it in row-major order, counted axis by axis
// while the axes before are in range.
func (r *Region) findFlowRect(x []float64, pos []int) int {
	e, before, inRange := 0, 0, true
	for k := range r.lv {
		l := &r.lv[k]
		i := l.find.find(x[pos[k]])
		s, ok := flowState(i, l.n, r.axes[k])
		if !ok {
			return -1
		}
		e = e*l.m + s
		// in-range cells whose first k axes precede these states
		before *= l.n
		if inRange {
			before += min(max(s-l.u, 0), l.n)
			inRange = s-l.u >= 0 && s-l.u < l.n
		}
	}
	return e - before
}

// flowState converts the result i of search on an axis slice with n bins
// to an extended state, reporting false if the flow bin needed is off.
func flowState(i, n int, a *Axis) (int, bool) {
	u := 0
	if a.underflow {
		u = 1
	}
	switch {
	case i < 0:
		return 0, a.underflow
	case i >= n:
		return n + u, a.overflow
	}
	return i + u, true
}

// flowPos returns the position of extended cell e in the flow list, or -1.
func (r *Region) flowPos(e int) int {
	if p, ok := slices.BinarySearch(r.flowExt, int32(e)); ok {
		return p
	}
	return -1
}

// inStates writes the per-axis bin numbers of in-range cell c to st.
func (r *Region) inStates(c int, st *[MaxAxes]int) {
	for k := len(r.lv) - 1; k >= 0; k-- {
		l := &r.lv[k]
		if !l.nested {
			st[k] = c % l.n
			c /= l.n
			continue
		}
		t := l.total()
		q, rem := c/t, c%t
		ip := sort.SearchInts(l.cum, rem+1) - 1
		st[k] = rem - l.cum[ip]
		c = q*r.lv[k-1].n + ip
	}
}

// extStates writes the per-axis bin numbers (or UnderflowBin, OverflowBin,
// AnyBin) of extended cell e to st.
func (r *Region) extStates(e int, st *[MaxAxes]int) {
	for k := len(r.lv) - 1; k >= 0; k-- {
		l := &r.lv[k]
		a := r.axes[k]
		if !l.nested {
			s := e % l.m
			e /= l.m
			st[k] = stateBin(s, l.u, l.n)
			continue
		}
		t := l.totalExt()
		q, rem := e/t, e%t
		sp := sort.SearchInts(l.cumExt, rem+1) - 1
		s := rem - l.cumExt[sp]
		p := &r.lv[k-1]
		if ip := sp - p.u; ip >= 0 && ip < p.n {
			st[k] = stateBin(s, l.u, len(a.byBin[ip])-1)
		} else {
			st[k] = AnyBin
		}
		e = q*p.m + sp
	}
}

// stateBin converts an extended state of an axis slice with n bins and
// underflow flag u to a bin number.
func stateBin(s, u, n int) int {
	switch {
	case s < u:
		return UnderflowBin
	case s-u >= n:
		return OverflowBin
	}
	return s - u
}

// cell returns the in-range cell of per-axis bin numbers idx, or -1 and
// the flow position, or -1, -1 if there is no such bin.
func (r *Region) cell(idx []int) (int, int) {
	if len(idx) != len(r.lv) {
		return -1, -1
	}
	in := true
	for _, i := range idx {
		if i < 0 {
			in = false
		}
	}
	if in {
		c, q, ip := 0, 0, 0
		for k := range r.lv {
			l := &r.lv[k]
			i := idx[k]
			if l.nested {
				if i >= len(r.axes[k].byBin[ip])-1 {
					return -1, -1
				}
				c = q*l.total() + l.cum[ip] + i
			} else {
				if i >= l.n {
					return -1, -1
				}
				q = c
				c = c*l.n + i
			}
			ip = i
		}
		return c, -1
	}
	e, qe, sp := 0, 0, 0
	for k := range r.lv {
		l := &r.lv[k]
		a := r.axes[k]
		i := idx[k]
		if l.nested {
			p := &r.lv[k-1]
			s := 0
			if ip := sp - p.u; ip >= 0 && ip < p.n {
				var ok bool
				if s, ok = binState(i, len(a.byBin[ip])-1, a); !ok {
					return -1, -1
				}
			} else if i != AnyBin {
				return -1, -1
			}
			e = qe*l.totalExt() + l.cumExt[sp] + s
			sp = s
			continue
		}
		s, ok := binState(i, l.n, a)
		if !ok {
			return -1, -1
		}
		qe = e
		e = e*l.m + s
		sp = s
	}
	return -1, r.flowPos(e)
}

// binState converts a bin number on an axis slice with n bins to an
// extended state, reporting false if there is no such bin.
func binState(i, n int, a *Axis) (int, bool) {
	u := 0
	if a.underflow {
		u = 1
	}
	switch {
	case i == UnderflowBin:
		return 0, a.underflow
	case i == OverflowBin:
		return n + u, a.overflow
	case i >= 0 && i < n:
		return i + u, true
	}
	return 0, false
}
