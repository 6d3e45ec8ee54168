// Package binning defines the binning of one to three (up to MaxAxes)
// observables and the one flat global bin index that every other part of
// desmear speaks: response matrices, data vectors, smoothing, outputs.
//
// # Axes, regions, schemes
//
// An Axis has a name, an optional unit, strictly increasing finite edges
// (variable widths) and an underflow and an overflow bin, each switched on
// or off. An axis after the first of its region may instead have edges by
// bin: one edge list per bin of the axis before it (a different
// transverse-momentum binning in each rapidity slice). The axis before an
// edges-by-bin axis must have plain edges.
//
// A Region is a named ordered list of axes forming a grid. A Scheme is an
// ordered list of regions (a central and a forward region, a signal and a
// control region). A truth-level and a finer reco-level binning are two
// schemes. Regions may read different observables, in any order; the
// scheme's coordinate order (AxisNames) is the order of first appearance,
// and each region reads the coordinates of its own axes.
//
// # Locating a point
//
// A value exactly on an edge belongs to the bin above it; the last edge
// belongs to the overflow (common practice for histograms). -Inf and +Inf
// belong to the underflow and overflow. A point with a NaN coordinate is
// Outside. A point belongs to the first region, in order, whose in-range
// bins contain it; if none does, to the first region with a switched-on
// flow bin that contains it; otherwise it is Outside. Locating costs
// O(log n) per axis, a few comparisons on an axis of equal-width bins
// (located by arithmetic, then checked against the edges), and does not
// allocate.
//
// # The global index (flattening order)
//
// Global bins 0..InRange()-1 are the in-range bins of all regions: the
// regions in order, and within a region row-major, the last axis fastest.
// Along an edges-by-bin axis a slice has as many bins as its edge list
// gives, so a region with axes y and pt (edges by y bin) has the bins
// (y0,pt0), (y0,pt1), ..., (y0,last pt bin of slice 0), (y1,pt0), ...
//
// Global bins InRange()..Len()-1 are the flow bins, regions in order. Within
// a region the flow bins follow the row-major order of the extended grid
// in which each axis runs through underflow (if on), its bins, overflow (if
// on), skipping the in-range cells. An edges-by-bin axis has no edges
// when the axis before it is in a flow bin, so under that flow it
// collapses into one state, AnyBin: the nested axes are merged into one
// flow bin. For one region with axes y (overflow on) and pt by y bin
// (underflow and overflow on) the flow order is
//
//	(y0,pt under), (y0,pt over), (y1,pt under), (y1,pt over), ..., (y over, pt any)
//
// The flow bins of one region are contiguous (Scheme.FlowSpan), as are
// its in-range bins (Scheme.Span). With a third, plain axis after pt
// (say mass) every cell above is followed through the mass states, mass
// running fastest, and cells with only mass in a flow state are flow bins
// too.
//
// Reverse lookup (Scheme.Bin) gives the region, the per-axis bin numbers
// (or UnderflowBin, OverflowBin, AnyBin; the bin number of an edges-by-bin
// axis counts within its slice), the edges (±Inf on the open side of a
// flow bin) and the volume (product of widths; +Inf for a flow bin).
// Scheme.Global is its inverse, from per-axis bin numbers to the global
// bin, for writing per-region tables and histograms; Region.Rectangular
// tells whether a region is a full grid (no edges-by-bin axis), and
// Axis.Edges, Axis.EdgesByBin and Axis.EdgesIn give the edges.
//
// # Neighbours, projections and slices
//
// Scheme.Neighbours gives the bins before and after a bin along one axis
// of its region, for smoothing and regularisation; flow bins and bins of
// other regions are never neighbours. Along the axis an edges-by-bin axis
// depends on, the neighbour is the bin of the adjacent slice that contains
// this bin's centre on the other axes. Scheme.Project and Scheme.Slice
// give 0/1 maps (Projection.Map, summed by Projection.Apply) from global
// bins to the bins of a projection (sum over axes) or of one slice (one
// bin of an axis fixed).
//
// # YAML
//
// Decode and ReadFile read a scheme from YAML (see Decode for the format),
// strictly: every problem is an *Error naming the file, line and field.
// DecodeNode reads a scheme already parsed as a yaml.Node, such as one
// written inline in a larger YAML file, keeping that file's positions.
//
// # Conventions
//
// Constructors and decoders return errors for every problem in what a
// user supplied. Methods taking a global bin or region number panic if it
// is out of range, and Locate panics if the number of coordinates is
// wrong: those are programmer errors. All types are immutable after
// construction and safe for concurrent use. A region has at most MaxAxes
// axes and a scheme at most MaxBins bins.
package binning
