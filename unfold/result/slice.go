package result

import (
	"fmt"
	"slices"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// Slice is a one-dimensional slice of a truth region along one of its
// axes, by default the last: the whole region for a 1-D region, one per
// in-range bin of the other axis in 2-D, one per in-range pair of bins of
// the other axes in 3-D. It is the unit of the ROOT histograms, the
// data-record tables and the spectrum plots.
type Slice struct {
	// Region is the index of the region in the scheme.
	Region int
	// Axis is the index, among the region's axes, of the axis the slice
	// runs along.
	Axis int
	// Outer holds the bin numbers along the region's other axes, in the
	// region's order, empty for a 1-D region.
	Outer []int
	// Edges are the edges of the slice's axis in this slice.
	Edges []float64
	// Cells holds the global bin of each ROOT-style cell along the
	// slice's axis: the underflow, the len(Edges)-1 bins, the overflow;
	// -1 for a flow cell the scheme does not have.
	Cells []int
}

// outerAxes returns the indices of the region axes of Outer.
func (sl *Slice) outerAxes(n int) []int {
	var k []int
	for a := range n {
		if a != sl.Axis {
			k = append(k, a)
		}
	}
	return k
}

// Bins returns the global bins of the in-range cells of the slice.
func (sl *Slice) Bins() []int { return sl.Cells[1 : len(sl.Cells)-1] }

// Suffix returns "" for a 1-D region, "_y0" for outer bin 0 of axis y,
// "_y0_x2" in 3-D.
func (sl *Slice) Suffix(s *binning.Scheme) string {
	axes := s.Regions()[sl.Region].Axes()
	suffix := ""
	for j, k := range sl.outerAxes(len(axes)) {
		suffix += fmt.Sprintf("_%s%d", axes[k].Name(), sl.Outer[j])
	}
	return suffix
}

// Range is the interval [Low, High) of an outer axis of a slice.
type Range struct {
	Axis, Unit string
	Low, High  float64
}

// String returns the interval as "[LOW, HIGH)".
func (r Range) String() string {
	return fmt.Sprintf("[%g, %g)", roundSig(r.Low, 12), roundSig(r.High, 12))
}

// Name returns the name of the slice: its region's, followed by the
// range of each outer axis ("central, y in [0, 0.8)").
func (sl *Slice) Name(s *binning.Scheme) string {
	name := s.Regions()[sl.Region].Name()
	for _, rg := range sl.Ranges(s) {
		name += ", " + rg.Axis + " in " + rg.String()
	}
	return name
}

// densityLabel returns the name and units of the density of r in the
// region reg: per unit bin volume of the region's axes, and per
// integrated luminosity when r has one.
func densityLabel(r *Result, reg *binning.Region) (name, units string) {
	name = "events per unit bin volume"
	var u []string
	for _, a := range reg.Axes() {
		if a.Unit() != "" {
			u = append(u, a.Unit())
		}
	}
	if r.Luminosity != 0 {
		name = "events per unit bin volume and integrated luminosity"
		if r.LuminosityUnit != "" {
			u = append(u, r.LuminosityUnit)
		}
	}
	switch len(u) {
	case 0:
		return name, ""
	case 1:
		return name, "1/" + u[0]
	}
	return name, "1/(" + strings.Join(u, " ") + ")"
}

// Ranges returns the intervals of the outer axes of the slice.
func (sl *Slice) Ranges(s *binning.Scheme) []Range {
	axes := s.Regions()[sl.Region].Axes()
	var rs []Range
	prev := 0 // the bin of the axis before (an edges-by-bin axis follows an outer one)
	for j, k := range sl.outerAxes(len(axes)) {
		i := sl.Outer[j]
		e := axes[k].EdgesIn(prev)
		rs = append(rs, Range{Axis: axes[k].Name(), Unit: axes[k].Unit(), Low: e[i], High: e[i+1]})
		prev = i
	}
	return rs
}

// Slices returns the slices of every region of s along its last axis,
// region by region, in the order of the outer bins.
func Slices(s *binning.Scheme) []Slice {
	out, err := SlicesAlong(s, "")
	if err != nil {
		panic("result: slices along the last axes: " + err.Error()) // always possible
	}
	return out
}

// SlicesAlong returns the slices of every region of s along the axis
// called axis, region by region, in the order of the other axes' bins; a
// region without that axis, and every region when axis is "", is sliced
// along its last axis. It returns an error if axis is not an axis of s,
// or a region cannot be sliced along it: when the axis after it has
// edges by its bin (those edges change from slice cell to slice cell).
func SlicesAlong(s *binning.Scheme, axis string) ([]Slice, error) {
	if axis != "" && s.AxisIndex(axis) < 0 {
		return nil, fmt.Errorf("the truth binning has no axis %q (its axes: %s)", axis, strings.Join(s.AxisNames(), ", "))
	}
	var out []Slice
	for r, reg := range s.Regions() {
		axes := reg.Axes()
		along := len(axes) - 1
		for k, a := range axes {
			if axis != "" && a.Name() == axis {
				along = k
			}
		}
		if along+1 < len(axes) && axes[along+1].ByBin() {
			return nil, fmt.Errorf("region %q cannot be sliced along %q: the edges of %q depend on its bin; slice along %q or a later axis", reg.Name(), axes[along].Name(), axes[along+1].Name(), axes[along+1].Name())
		}
		idx := make([]int, len(axes))
		var rec func(k, prev int)
		rec = func(k, prev int) {
			if k == len(axes) {
				sl := Slice{Region: r, Axis: along, Edges: axes[along].EdgesIn(parent(idx, along))}
				for a, i := range idx {
					if a != along {
						sl.Outer = append(sl.Outer, i)
					}
				}
				n := len(sl.Edges) - 1
				cell := slices.Clone(idx)
				for c := 0; c < n+2; c++ {
					cell[along] = rootio.BinOf(c, n)
					sl.Cells = append(sl.Cells, s.Global(r, cell...))
				}
				out = append(out, sl)
				return
			}
			if k == along {
				rec(k+1, 0)
				return
			}
			for i := 0; i < axes[k].Bins(prev); i++ {
				idx[k] = i
				rec(k+1, i)
			}
		}
		rec(0, 0)
	}
	return out, nil
}

// parent returns the bin of the axis before axis k in idx (0 for the
// first axis): the bin an edges-by-bin axis k takes its edges from.
func parent(idx []int, k int) int {
	if k == 0 {
		return 0
	}
	return idx[k-1]
}
