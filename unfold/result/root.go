package result

import (
	"fmt"
	"strings"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// RootFile is the name of the ROOT file of a result folder.
const RootFile = "result.root"

func init() {
	Register(Writer{Name: "root", Default: true, NeedsTruthBinning: true, Write: writeROOT})
}

// writeROOT writes result.root: the histograms of rootHistograms.
func writeROOT(f *Folder, r *Result, s *binning.Scheme) ([]string, error) {
	if err := r.checkBins(s); err != nil {
		return nil, err
	}
	path, err := f.Reserve(RootFile)
	if err != nil {
		return nil, err
	}
	sl, err := SlicesAlong(s, r.SliceAxis)
	if err != nil {
		return nil, fmt.Errorf("result: the ROOT slices: %w", err)
	}
	dens, densUnc := r.densities(s)
	h1, h2 := sliceHistograms(s, sl, r.Estimate, r.Uncertainty, dens, densUnc)
	h2 = append(h2, matrixHistograms(s, r.Correlation(), "correlation", "correlation")...)
	h2 = append(h2, matrixHistograms(s, r.Covariance, "covariance", "covariance")...)
	h2 = append(h2, responseHistograms(s, r)...)
	d1, d2 := derivedHistograms(r.Derived)
	h1, h2 = append(h1, d1...), append(h2, d2...)
	if err := rootio.WriteFile(path, h1, h2); err != nil {
		return nil, err
	}
	return []string{RootFile}, nil
}

// rootHistograms is sliceHistograms along the last axis of each region.
func rootHistograms(s *binning.Scheme, est, unc, dens, densUnc []float64) ([]*rootio.Hist1D, []*rootio.Hist2D) {
	return sliceHistograms(s, Slices(s), est, unc, dens, densUnc)
}

// sliceHistograms makes the ROOT histograms of the result: one TH1D per
// slice of slices (the whole region for a 1-D one), of counts and of
// densities, and a TH2D of counts and one of densities for each
// rectangular 2-D region. Flow bins of the scheme go into ROOT's flow
// cells of the slice histograms and of the TH2D.
func sliceHistograms(s *binning.Scheme, slices []Slice, est, unc, dens, densUnc []float64) ([]*rootio.Hist1D, []*rootio.Hist2D) {
	var h1 []*rootio.Hist1D
	var h2 []*rootio.Hist2D
	val := func(g int, v []float64) float64 {
		if g < 0 || v == nil {
			return 0
		}
		return v[g]
	}
	for _, sl := range slices {
		suffix := sl.Suffix(s)
		name := s.Regions()[sl.Region].Name()
		n := len(sl.Edges) - 1
		hc := rootio.NewHist1D(name+"/counts"+suffix, sl.Edges)
		hd := rootio.NewHist1D(name+"/density"+suffix, sl.Edges)
		hc.Title, hd.Title = title(s, &sl, "counts"), title(s, &sl, "density")
		for c, g := range sl.Cells {
			hc.SumW[c], hc.SumW2[c] = val(g, est), sq(val(g, unc))
			if c >= 1 && c <= n {
				hd.SumW[c], hd.SumW2[c] = val(g, dens), sq(val(g, densUnc))
			}
		}
		h1 = append(h1, hc, hd)
	}
	for r, reg := range s.Regions() {
		axes := reg.Axes()
		if len(axes) == 2 && reg.Rectangular() {
			xe, ye := axes[0].Edges(), axes[1].Edges()
			hc := rootio.NewHist2D(reg.Name()+"/counts2d", xe, ye)
			hd := rootio.NewHist2D(reg.Name()+"/density2d", xe, ye)
			hc.Title, hd.Title = reg.Name()+" counts", reg.Name()+" density"
			nx, ny := len(xe)-1, len(ye)-1
			for iy := 0; iy < ny+2; iy++ {
				for ix := 0; ix < nx+2; ix++ {
					c := hc.Index(ix, iy)
					g := s.Global(r, rootio.BinOf(ix, nx), rootio.BinOf(iy, ny))
					hc.SumW[c], hc.SumW2[c] = val(g, est), sq(val(g, unc))
					if ix >= 1 && ix <= nx && iy >= 1 && iy <= ny {
						hd.SumW[c], hd.SumW2[c] = val(g, dens), sq(val(g, densUnc))
					}
				}
			}
			h2 = append(h2, hc, hd)
		}
	}
	return h1, h2
}

func sq(x float64) float64 { return x * x }

func title(s *binning.Scheme, sl *Slice, what string) string {
	t := s.Regions()[sl.Region].Name() + " " + what
	for _, r := range sl.Ranges(s) {
		t += fmt.Sprintf(" %s[%g,%g)", r.Axis, r.Low, r.High)
	}
	return t
}

// regionBins returns the global bins of region k of s: its in-range
// bins, then its flow bins, each in global order.
func regionBins(s *binning.Scheme, k int) []int {
	var g []int
	lo, hi := s.Span(k)
	flo, fhi := s.FlowSpan(k)
	for _, span := range [][2]int{{lo, hi}, {flo, fhi}} {
		for i := span[0]; i < span[1]; i++ {
			g = append(g, i)
		}
	}
	return g
}

// matrixHistograms makes one TH2D per region of s, REGION/NAME, of the
// matrix m (the correlation or the covariance over the truth bins)
// between the region's bins (regionBins order, numbered 0, 1, ... along
// both axes); none when m is nil.
func matrixHistograms(s *binning.Scheme, m [][]float64, name, what string) []*rootio.Hist2D {
	if m == nil {
		return nil
	}
	var h2 []*rootio.Hist2D
	for k, reg := range s.Regions() {
		g := regionBins(s, k)
		edges := make([]float64, len(g)+1)
		for i := range edges {
			edges[i] = float64(i)
		}
		h := rootio.NewHist2D(reg.Name()+"/"+name, edges, edges)
		h.Title = reg.Name() + " " + what + " (in-range bins, then flow bins, in global order)"
		h.Entries = float64(len(g) * len(g))
		for iy, gy := range g {
			for ix, gx := range g {
				h.SumW[h.Index(ix+1, iy+1)] = m[gx][gy]
			}
		}
		h2 = append(h2, h)
	}
	return h2
}

// correlationHistograms is matrixHistograms of the correlation rho.
func correlationHistograms(s *binning.Scheme, rho [][]float64) []*rootio.Hist2D {
	return matrixHistograms(s, rho, "correlation", "correlation")
}

// derivedHistograms makes the histograms of the derived quantities,
// derived/NAME: a TH1D for a quantity with one kept axis, a TH2D for one
// with two kept axes forming a full grid, with the uncertainty² as the
// squared weights; other quantities (three axes, or edges by bin) have
// their table only. Derived quantities have no flow bins: the flow cells
// are 0.
func derivedHistograms(ds []Derived) ([]*rootio.Hist1D, []*rootio.Hist2D) {
	var h1 []*rootio.Hist1D
	var h2 []*rootio.Hist2D
	for i := range ds {
		d := &ds[i]
		reg := d.Binning.Regions()[0]
		axes := reg.Axes()
		unc := func(t int) float64 {
			if d.Uncertainty == nil {
				return 0
			}
			return d.Uncertainty[t]
		}
		title := fmt.Sprintf("%s: %s of %s over %s", d.Name, d.Kind, d.Region, strings.Join(d.Axes, ", "))
		switch {
		case len(axes) == 1:
			h := rootio.NewHist1D("derived/"+d.Name, axes[0].Edges())
			h.Title = title
			for t := range d.Value {
				h.SumW[t+1], h.SumW2[t+1] = d.Value[t], sq(unc(t))
			}
			h1 = append(h1, h)
		case len(axes) == 2 && reg.Rectangular():
			xe, ye := axes[0].Edges(), axes[1].Edges()
			h := rootio.NewHist2D("derived/"+d.Name, xe, ye)
			h.Title = title
			for t := range d.Value {
				b := d.Binning.Bin(t)
				c := h.Index(b.Index[0]+1, b.Index[1]+1)
				h.SumW[c], h.SumW2[c] = d.Value[t], sq(unc(t))
			}
			h2 = append(h2, h)
		}
	}
	return h1, h2
}

// responseHistograms makes one TH2D per truth region of s,
// REGION/response, of the response probability R_ij = A_ij / G_j: along
// x the region's truth bins (regionBins order, numbered 0, 1, ...),
// along y every reco bin by global index. None without the migrations,
// or when they have more than MaxHeatBins reco bins or truth bins.
func responseHistograms(s *binning.Scheme, r *Result) []*rootio.Hist2D {
	m := r.Migrations
	if m == nil || r.Generated == nil {
		return nil
	}
	nr, nt := m.Dims()
	if nr > MaxHeatBins || nt > MaxHeatBins {
		return nil
	}
	ptr, row, val := m.ColPtr(), m.RowIdx(), m.Values()
	ye := make([]float64, nr+1)
	for i := range ye {
		ye[i] = float64(i)
	}
	var h2 []*rootio.Hist2D
	for k, reg := range s.Regions() {
		g := regionBins(s, k)
		xe := make([]float64, len(g)+1)
		for i := range xe {
			xe[i] = float64(i)
		}
		h := rootio.NewHist2D(reg.Name()+"/response", xe, ye)
		h.Title = reg.Name() + " response probability (x: truth bins of the region, in-range then flow; y: reco bins, global index)"
		for ix, j := range g {
			if r.Generated[j] <= 0 {
				continue
			}
			for p := ptr[j]; p < ptr[j+1]; p++ {
				h.SumW[h.Index(ix+1, row[p]+1)] = val[p] / r.Generated[j]
			}
		}
		h.Entries = float64(m.NNZ())
		h2 = append(h2, h)
	}
	return h2
}
