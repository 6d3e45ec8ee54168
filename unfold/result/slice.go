package result

import (
	"fmt"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// Slice is a one-dimensional slice of a truth region along its last
// axis: the whole region for a 1-D region, one per in-range bin of the
// outer axis in 2-D, one per in-range pair of outer bins in 3-D. It is
// the unit of the ROOT histograms, the data-record tables and the
// spectrum plots.
type Slice struct {
	// Region is the index of the region in the scheme.
	Region int
	// Outer holds the bin numbers along the region's outer axes (all but
	// the last), empty for a 1-D region.
	Outer []int
	// Edges are the edges of the last axis in this slice.
	Edges []float64
	// Cells holds the global bin of each ROOT-style cell along the last
	// axis: the underflow, the len(Edges)-1 bins, the overflow; -1 for
	// a flow cell the scheme does not have.
	Cells []int
}

// Bins returns the global bins of the in-range cells of the slice.
func (sl *Slice) Bins() []int { return sl.Cells[1 : len(sl.Cells)-1] }

// Suffix returns "" for a 1-D region, "_y0" for outer bin 0 of axis y,
// "_y0_x2" in 3-D.
func (sl *Slice) Suffix(s *binning.Scheme) string {
	axes := s.Regions()[sl.Region].Axes()
	suffix := ""
	for k, i := range sl.Outer {
		suffix += fmt.Sprintf("_%s%d", axes[k].Name(), i)
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
	prev := 0
	for k, i := range sl.Outer {
		e := axes[k].EdgesIn(prev)
		rs = append(rs, Range{Axis: axes[k].Name(), Unit: axes[k].Unit(), Low: e[i], High: e[i+1]})
		prev = i
	}
	return rs
}

// Slices returns the slices of every region of s, region by region, in
// the order of the outer bins.
func Slices(s *binning.Scheme) []Slice {
	var out []Slice
	for r, reg := range s.Regions() {
		axes := reg.Axes()
		last := axes[len(axes)-1]
		var rec func(prefix []int, k int)
		rec = func(prefix []int, k int) {
			prev := 0
			if len(prefix) > 0 {
				prev = prefix[len(prefix)-1]
			}
			if k < len(axes)-1 {
				for i := 0; i < axes[k].Bins(prev); i++ {
					rec(append(prefix, i), k+1)
				}
				return
			}
			sl := Slice{Region: r, Outer: append([]int(nil), prefix...), Edges: last.EdgesIn(prev)}
			n := len(sl.Edges) - 1
			for c := 0; c < n+2; c++ {
				idx := append(append([]int(nil), prefix...), rootio.BinOf(c, n))
				sl.Cells = append(sl.Cells, s.Global(r, idx...))
			}
			out = append(out, sl)
		}
		rec(nil, 0)
	}
	return out
}
