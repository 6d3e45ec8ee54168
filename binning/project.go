package binning

import (
	"fmt"
	"slices"
)

// Projection is a 0/1 map from the global bins of a scheme to the bins of
// a lower-dimensional binning: the projection of a region onto some of its
// axes (summing over the others) or one slice of a region (one bin of an
// axis fixed). Only in-range source bins are mapped; flow bins and bins of
// other regions map to -1.
type Projection struct {
	// Target is the binning of the result: one region with the name of the
	// source region, the kept axes in their order and no flow bins.
	Target *Scheme
	// Map has one entry per source global bin: the target bin it adds to,
	// or -1 if it is not included.
	Map []int
	// Region is the source region; Axes are the source-region axes kept,
	// in the order of Target's axes.
	Region int
	Axes   []int
}

// Project returns the projection of region r onto the axes not listed in
// sumAxes (indices into the region's axes), summing over the listed ones.
// It returns an error if an index is out of range or repeated, no axis
// would be left, or an axis would be summed over while an axis with edges
// by its bin is kept (its edges would not be defined).
func (s *Scheme) Project(r int, sumAxes ...int) (*Projection, error) {
	reg, err := s.regionArg(r)
	if err != nil {
		return nil, err
	}
	d := len(reg.axes)
	sum := make([]bool, d)
	for _, k := range sumAxes {
		if k < 0 || k >= d {
			return nil, fmt.Errorf("binning: project region %q: axis %d out of range (the region has %d axes)", reg.name, k, d)
		}
		if sum[k] {
			return nil, fmt.Errorf("binning: project region %q: axis %q listed twice", reg.name, reg.axes[k].name)
		}
		sum[k] = true
	}
	var keep []int
	var axes []*Axis
	for k, a := range reg.axes {
		if sum[k] {
			continue
		}
		if a.byBin != nil && sum[k-1] {
			return nil, fmt.Errorf("binning: project region %q: cannot sum over %q and keep %q, whose edges depend on the bin of %q; sum over %q as well, or take slices", reg.name, reg.axes[k-1].name, a.name, reg.axes[k-1].name, a.name)
		}
		keep = append(keep, k)
		axes = append(axes, &Axis{name: a.name, unit: a.unit, edges: a.edges, byBin: a.byBin})
	}
	if len(keep) == 0 {
		return nil, fmt.Errorf("binning: project region %q: summing over every axis leaves no bins", reg.name)
	}
	return s.mapOnto(r, keep, axes, -1, 0)
}

// Slice returns the slice of region r at bin `bin` of axis `axis` (an
// index into the region's axes): the in-range bins with that bin number,
// mapped onto the other axes. An axis with edges by bin of the fixed axis
// takes the edges of that bin. It returns an error if the region has one
// axis, the axis or bin is out of range, or the axis has edges by bin
// (its bin numbers depend on the axis before it; fix that axis instead).
func (s *Scheme) Slice(r, axis, bin int) (*Projection, error) {
	reg, err := s.regionArg(r)
	if err != nil {
		return nil, err
	}
	d := len(reg.axes)
	if d < 2 {
		return nil, fmt.Errorf("binning: slice of region %q: a one-axis region has no slices", reg.name)
	}
	if axis < 0 || axis >= d {
		return nil, fmt.Errorf("binning: slice of region %q: axis %d out of range (the region has %d axes)", reg.name, axis, d)
	}
	fa := reg.axes[axis]
	if fa.byBin != nil {
		return nil, fmt.Errorf("binning: slice of region %q: axis %q has edges by bin of %q, so its bin numbers differ per slice; slice %q first", reg.name, fa.name, reg.axes[axis-1].name, reg.axes[axis-1].name)
	}
	if bin < 0 || bin >= len(fa.edges)-1 {
		return nil, fmt.Errorf("binning: slice of region %q: bin %d of axis %q out of range (it has %d bins)", reg.name, bin, fa.name, len(fa.edges)-1)
	}
	var keep []int
	var axes []*Axis
	for k, a := range reg.axes {
		if k == axis {
			continue
		}
		keep = append(keep, k)
		ax := &Axis{name: a.name, unit: a.unit, edges: a.edges, byBin: a.byBin}
		if a.byBin != nil && k == axis+1 {
			ax.edges, ax.byBin = a.byBin[bin], nil
		}
		axes = append(axes, ax)
	}
	return s.mapOnto(r, keep, axes, axis, bin)
}

func (s *Scheme) regionArg(r int) (*Region, error) {
	if r < 0 || r >= len(s.regions) {
		return nil, fmt.Errorf("binning: region %d out of range (the scheme has %d regions)", r, len(s.regions))
	}
	return s.regions[r], nil
}

// mapOnto builds the target scheme of the kept axes and maps the in-range
// bins of region r (with bin `bin` of axis `fixed`, if fixed >= 0).
func (s *Scheme) mapOnto(r int, keep []int, axes []*Axis, fixed, bin int) (*Projection, error) {
	reg := s.regions[r]
	treg, err := NewRegion(reg.name, axes...)
	if err != nil {
		return nil, err
	}
	target, err := NewScheme(treg)
	if err != nil {
		return nil, err
	}
	p := &Projection{Target: target, Map: make([]int, s.n), Region: r, Axes: slices.Clone(keep)}
	for g := range p.Map {
		p.Map[g] = -1
	}
	lo, hi := s.Span(r)
	var st [MaxAxes]int
	idx := make([]int, len(keep))
	for g := lo; g < hi; g++ {
		reg.inStates(g-lo, &st)
		if fixed >= 0 && st[fixed] != bin {
			continue
		}
		for j, k := range keep {
			idx[j] = st[k]
		}
		c, _ := treg.cell(idx)
		if c < 0 {
			panic(fmt.Sprintf("binning: projection of bin %d found no target bin", g))
		}
		p.Map[g] = c
	}
	return p, nil
}

// Apply writes the projection of src (one value per source global bin) to
// dst (one per target bin): dst[t] is the sum of src[g] over the bins g
// with Map[g] == t, added in increasing g. It returns dst. It panics if
// the lengths are wrong; dst and src must not overlap.
func (p *Projection) Apply(dst, src []float64) []float64 {
	if len(src) != len(p.Map) || len(dst) != p.Target.Len() {
		panic(fmt.Sprintf("binning: Projection.Apply with len(dst)=%d, len(src)=%d; want %d and %d", len(dst), len(src), p.Target.Len(), len(p.Map)))
	}
	clear(dst)
	for g, t := range p.Map {
		if t >= 0 {
			dst[t] += src[g]
		}
	}
	return dst
}
