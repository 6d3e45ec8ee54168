package binning

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"sort"
	"strconv"
)

// Outside is the global index of a point that lies in no bin: outside
// every region's in-range bins where the flow bin it would need is
// switched off, or with a NaN coordinate.
const Outside = -1

// Scheme is an ordered list of named regions with one global bin index.
// The in-range bins of all regions come first, 0..InRange()-1, regions in
// order and row-major within a region; the flow bins follow,
// InRange()..Len()-1, regions in order and in each region's flow order
// (see Region). A Scheme is immutable and safe for concurrent use.
type Scheme struct {
	regions []*Region
	names   []string // distinct axis names, in order of first appearance
	units   []string
	pos     [][]int // pos[r][k]: position in names of axis k of region r
	inOff   []int   // in-range bins of region r: inOff[r]..inOff[r+1]-1
	flowOff []int   // flow bins of region r: nIn+flowOff[r]..nIn+flowOff[r+1]-1
	nIn, n  int
}

// NewScheme returns the scheme of the given regions, in order. It returns
// an error if there is no region, two regions share a name, or axes of the
// same name have different units in different regions.
func NewScheme(regions ...*Region) (*Scheme, error) {
	if len(regions) == 0 {
		return nil, errors.New("binning: scheme without regions")
	}
	s := &Scheme{
		regions: append([]*Region(nil), regions...),
		pos:     make([][]int, len(regions)),
		inOff:   make([]int, len(regions)+1),
		flowOff: make([]int, len(regions)+1),
	}
	for r, reg := range regions {
		if reg == nil {
			return nil, fmt.Errorf("binning: region %d is nil", r)
		}
		for _, o := range regions[:r] {
			if o.name == reg.name {
				return nil, fmt.Errorf("binning: region name %q used twice", reg.name)
			}
		}
		s.pos[r] = make([]int, len(reg.axes))
		for k, a := range reg.axes {
			j := s.AxisIndex(a.name)
			if j < 0 {
				j = len(s.names)
				s.names = append(s.names, a.name)
				s.units = append(s.units, a.unit)
			} else if s.units[j] != a.unit {
				return nil, fmt.Errorf("binning: axis %q has unit %q in region %q but %q in an earlier region; use one unit per observable", a.name, a.unit, reg.name, s.units[j])
			}
			s.pos[r][k] = j
		}
		s.inOff[r+1] = s.inOff[r] + reg.nIn
		s.flowOff[r+1] = s.flowOff[r] + len(reg.flowExt)
	}
	s.nIn = s.inOff[len(regions)]
	s.n = s.nIn + s.flowOff[len(regions)]
	if s.n > MaxBins {
		return nil, fmt.Errorf("binning: the scheme has %d bins (flow bins included); at most %d are supported", s.n, MaxBins)
	}
	return s, nil
}

// AxisIndex returns the position of the axis called name in AxisNames, or
// -1.
func (s *Scheme) AxisIndex(name string) int { return slices.Index(s.names, name) }

// Len returns the number of global bins, flow bins included.
func (s *Scheme) Len() int { return s.n }

// InRange returns the number of in-range bins: global bins 0..InRange()-1
// are in range, InRange()..Len()-1 are flow bins.
func (s *Scheme) InRange() int { return s.nIn }

// AxisNames returns the distinct axis names of the scheme in order of
// first appearance. This is the coordinate order of Locate. The slice must
// not be modified.
func (s *Scheme) AxisNames() []string { return s.names }

// AxisUnit returns the unit of the axis called name, and whether there is
// such an axis.
func (s *Scheme) AxisUnit(name string) (string, bool) {
	j := s.AxisIndex(name)
	if j < 0 {
		return "", false
	}
	return s.units[j], true
}

// Regions returns the regions in order. The slice must not be modified.
func (s *Scheme) Regions() []*Region { return s.regions }

// RegionIndex returns the index of the region called name, or -1.
func (s *Scheme) RegionIndex(name string) int {
	for r, reg := range s.regions {
		if reg.name == name {
			return r
		}
	}
	return -1
}

// Span returns the in-range global bins of region r: lo..hi-1, in the
// region's row-major order.
func (s *Scheme) Span(r int) (lo, hi int) { return s.inOff[r], s.inOff[r+1] }

// FlowSpan returns the flow global bins of region r: lo..hi-1, in the
// region's flow order.
func (s *Scheme) FlowSpan(r int) (lo, hi int) {
	return s.nIn + s.flowOff[r], s.nIn + s.flowOff[r+1]
}

// Locate returns the global bin of the point x, whose coordinates are in
// AxisNames order (each region reads the coordinates of its own axes), or
// Outside. The point belongs to the first region whose in-range bins
// contain it; if none does, to the first region with a switched-on flow
// bin that contains it. A value on an edge belongs to the bin above it, the
// last edge to the overflow; ±Inf belong to the flow bins; a NaN
// coordinate gives Outside. Locate does not allocate and costs
// O(log n) per axis. It panics if len(x) != len(AxisNames()).
func (s *Scheme) Locate(x []float64) int {
	if len(x) != len(s.names) {
		panic(fmt.Sprintf("binning: Locate with %d coordinates, want %d", len(x), len(s.names)))
	}
	for _, v := range x {
		if v != v {
			return Outside
		}
	}
	for r, reg := range s.regions {
		if c := reg.find(x, s.pos[r]); c >= 0 {
			return s.inOff[r] + c
		}
	}
	// In no region's in-range bins: the first switched-on flow bin.
	for r, reg := range s.regions {
		if len(reg.flowExt) == 0 {
			continue
		}
		if p := reg.findFlow(x, s.pos[r]); p >= 0 {
			return s.nIn + s.flowOff[r] + p
		}
	}
	return Outside
}

// Bin describes one global bin. Index, Low and High are per axis of its
// region, in the region's axis order (Axes names them). Index holds the
// bin number on that axis (within the slice of the axis before it, for an
// edges-by-bin axis) or UnderflowBin, OverflowBin or AnyBin; the edges of
// a flow bin are ±Inf on its open side and both infinite for AnyBin.
// Volume is the product of the widths (+Inf for a flow bin), for
// densities and differential cross sections.
type Bin struct {
	Region     int
	RegionName string
	Flow       bool
	Axes       []string
	Index      []int
	Low, High  []float64
	Volume     float64
}

// locateBin returns the region and in-range cell (or -1 and flow
// position) of global bin g. It panics if g is out of range.
func (s *Scheme) locateBin(g int) (r, c, p int) {
	if g < 0 || g >= s.n {
		panic(fmt.Sprintf("binning: global bin %d out of range [0,%d)", g, s.n))
	}
	if g < s.nIn {
		r = sort.SearchInts(s.inOff, g+1) - 1
		return r, g - s.inOff[r], -1
	}
	f := g - s.nIn
	r = sort.SearchInts(s.flowOff, f+1) - 1
	return r, -1, f - s.flowOff[r]
}

// states writes the per-axis bin numbers of global bin g to st and returns
// its region and whether it is a flow bin.
func (s *Scheme) states(g int, st *[MaxAxes]int) (int, bool) {
	r, c, p := s.locateBin(g)
	reg := s.regions[r]
	if c >= 0 {
		reg.inStates(c, st)
		return r, false
	}
	reg.extStates(int(reg.flowExt[p]), st)
	return r, true
}

// Bin returns the description of global bin g. It panics if g is not in
// 0..Len()-1.
func (s *Scheme) Bin(g int) Bin {
	var st [MaxAxes]int
	r, flow := s.states(g, &st)
	reg := s.regions[r]
	d := len(reg.axes)
	b := Bin{
		Region: r, RegionName: reg.name, Flow: flow,
		Axes:  make([]string, d),
		Index: make([]int, d),
		Low:   make([]float64, d),
		High:  make([]float64, d),
	}
	b.Volume = 1
	for k, a := range reg.axes {
		b.Axes[k] = a.name
		b.Index[k] = st[k]
		b.Low[k], b.High[k] = reg.binEdges(k, &st)
		b.Volume *= b.High[k] - b.Low[k]
	}
	return b
}

// binEdges returns the edges of axis k's bin in per-axis states st.
func (r *Region) binEdges(k int, st *[MaxAxes]int) (lo, hi float64) {
	i := st[k]
	if i == AnyBin {
		return math.Inf(-1), math.Inf(1)
	}
	outer := 0
	if r.lv[k].nested {
		outer = st[k-1]
	}
	e := r.axes[k].EdgesIn(outer)
	switch i {
	case UnderflowBin:
		return math.Inf(-1), e[0]
	case OverflowBin:
		return e[len(e)-1], math.Inf(1)
	}
	return e[i], e[i+1]
}

// Global returns the global bin of region r with per-axis bin numbers idx
// (bin numbers or UnderflowBin, OverflowBin, AnyBin, in the region's axis
// order), or -1 if there is no such bin (out of range, or a flow bin that
// is switched off). It is the inverse of Bin's Index.
func (s *Scheme) Global(r int, idx ...int) int {
	c, p := s.regions[r].cell(idx)
	switch {
	case c >= 0:
		return s.inOff[r] + c
	case p >= 0:
		return s.nIn + s.flowOff[r] + p
	}
	return -1
}

// Label returns a short human-readable label of global bin g, for example
// "central y[0.5,1) pt[30,50)". Flow bins show an infinite edge, and a
// collapsed nested axis shows "pt(any)". It panics if g is out of range.
func (s *Scheme) Label(g int) string { return string(s.appendLabel(nil, g, nil)) }

// EachLabel calls fn with every global bin g in order and its Label,
// as bytes valid only until fn returns. It formats the part of each
// axis state once (one bin of one axis, in one slice for an
// edges-by-bin axis), so a pass over the labels of all bins costs far
// less than calling Label for each.
func (s *Scheme) EachLabel(fn func(g int, label []byte)) {
	memo := map[uint64]string{}
	// parts[r][k]: the label parts of axis k of region r, by state
	// (see labelParts)
	parts := make([][][][]byte, len(s.regions))
	for r, reg := range s.regions {
		parts[r] = make([][][]byte, len(reg.axes))
		for k := range reg.axes {
			parts[r][k] = reg.labelParts(k, memo)
		}
	}
	var buf []byte
	label := func(g, r int, st *[MaxAxes]int) {
		reg := s.regions[r]
		buf = append(buf[:0], reg.name...)
		for k, l := range reg.lv {
			buf = append(buf, parts[r][k][l.partIndex(k, st)]...)
		}
		fn(g, buf)
	}
	for g := 0; g < s.n; {
		var st [MaxAxes]int
		r, _ := s.states(g, &st)
		if reg := s.regions[r]; g < s.nIn && reg.rect {
			// the in-range bins of a product of axes: row-major, the
			// last axis fastest
			for _, end := s.Span(r); g < end; g++ {
				label(g, r, &st)
				for k := len(reg.lv) - 1; k >= 0; k-- {
					if st[k]++; st[k] < reg.lv[k].n {
						break
					}
					st[k] = 0
				}
			}
			continue
		}
		label(g, r, &st)
		g++
	}
}

// labelParts returns the label parts of every state of axis k, indexed
// by partIndex.
func (r *Region) labelParts(k int, memo map[uint64]string) [][]byte {
	l := &r.lv[k]
	var st [MaxAxes]int
	state := func(i int) []byte {
		st[k] = i
		return r.appendAxisLabel(nil, k, &st, memo)
	}
	if !l.nested {
		p := make([][]byte, l.n+2)
		for i := range p {
			p[i] = state(i - 2)
		}
		return p
	}
	// outer in range: the states of its slice; then AnyBin
	var p [][]byte
	for o := range r.lv[k-1].n {
		st[k-1] = o
		for i := range r.axes[k].Bins(o) + 2 {
			p = append(p, state(i-2))
		}
	}
	return append(p, state(AnyBin))
}

// partIndex returns the index of axis k's state in st among the parts of
// labelParts.
func (l *level) partIndex(k int, st *[MaxAxes]int) int {
	if !l.nested {
		return st[k] + 2
	}
	if st[k] == AnyBin {
		return l.total() + 2*(len(l.cum)-1)
	}
	o := st[k-1]
	return l.cum[o] + 2*o + st[k] + 2
}

// appendLabel appends the label of bin g to dst.
func (s *Scheme) appendLabel(dst []byte, g int, memo map[uint64]string) []byte {
	var st [MaxAxes]int
	r, _ := s.states(g, &st)
	reg := s.regions[r]
	dst = append(dst, reg.name...)
	for k := range reg.axes {
		dst = reg.appendAxisLabel(dst, k, &st, memo)
	}
	return dst
}

// appendAxisLabel appends the part of a label for axis k in states st;
// memo, when not nil, keeps the formatted edges by their bits (so that -0
// and 0 stay apart).
func (r *Region) appendAxisLabel(dst []byte, k int, st *[MaxAxes]int, memo map[uint64]string) []byte {
	edge := func(v float64) {
		if memo == nil {
			dst = append(dst, formatEdge(v)...)
			return
		}
		str, ok := memo[math.Float64bits(v)]
		if !ok {
			str = formatEdge(v)
			memo[math.Float64bits(v)] = str
		}
		dst = append(dst, str...)
	}
	a := r.axes[k]
	dst = append(dst, ' ')
	dst = append(dst, a.name...)
	if st[k] == AnyBin {
		return append(dst, "(any)"...)
	}
	lo, hi := r.binEdges(k, st)
	if math.IsInf(lo, -1) {
		dst = append(dst, "(-inf,"...)
	} else {
		dst = append(dst, '[')
		edge(lo)
		dst = append(dst, ',')
	}
	if math.IsInf(hi, 1) {
		dst = append(dst, "inf)"...)
	} else {
		edge(hi)
		dst = append(dst, ')')
	}
	return dst
}

func formatEdge(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// Neighbours returns the global bins before and after in-range bin g along
// axis `axis` of its region (an index into the region's axes), or -1 where
// there is none. Flow bins and bins of other regions are never
// neighbours; a flow bin g has none.
//
// Along a plain axis on which the next axis has edges by bin, the
// neighbour lies in the adjacent slice: it is the bin of that slice that
// contains the centre of g on the other axes, or -1 if the centre is
// outside that slice's in-range bins. This relation need not be
// symmetric when the slices have different edges. Along any other axis the
// neighbour is the adjacent bin with all other bin numbers equal.
//
// Neighbours panics if g is out of range or axis is not an axis of g's
// region.
func (s *Scheme) Neighbours(g, axis int) (prev, next int) {
	var st [MaxAxes]int
	r, flow := s.states(g, &st)
	reg := s.regions[r]
	if axis < 0 || axis >= len(reg.axes) {
		panic(fmt.Sprintf("binning: Neighbours along axis %d of region %q with %d axes", axis, reg.name, len(reg.axes)))
	}
	if flow {
		return -1, -1
	}
	var x [MaxAxes]float64
	for k := range reg.axes {
		lo, hi := reg.binEdges(k, &st)
		x[k] = 0.5 * (lo + hi)
	}
	return s.neighbour(r, axis, &st, &x, -1), s.neighbour(r, axis, &st, &x, +1)
}

// neighbour returns the in-range neighbour of the bin with states st and
// centre x in direction dir along axis k of region r, or -1.
func (s *Scheme) neighbour(r, k int, st *[MaxAxes]int, x *[MaxAxes]float64, dir int) int {
	reg := s.regions[r]
	outer := 0
	if reg.lv[k].nested {
		outer = st[k-1]
	}
	e := reg.axes[k].EdgesIn(outer)
	i := st[k] + dir
	if i < 0 || i >= len(e)-1 {
		return -1
	}
	y := *x
	y[k] = 0.5 * (e[i] + e[i+1])
	c := reg.find(y[:len(reg.axes)], reg.ident)
	if c < 0 {
		return -1
	}
	return s.inOff[r] + c
}

// RegionOf returns the region of global bin g. It panics if g is out of
// range.
func (s *Scheme) RegionOf(g int) int {
	r, _, _ := s.locateBin(g)
	return r
}

// NumAxes returns the number of axes of the region of global bin g (the
// valid axis arguments of Neighbours). It panics if g is out of range.
func (s *Scheme) NumAxes(g int) int { return len(s.regions[s.RegionOf(g)].axes) }
