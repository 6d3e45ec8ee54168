package result

import (
	"fmt"

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
	dens, densUnc := r.densities(s)
	h1, h2 := rootHistograms(s, r.Estimate, r.Uncertainty, dens, densUnc)
	h2 = append(h2, correlationHistograms(s, r.Correlation())...)
	h2 = append(h2, responseHistograms(s, r)...)
	if err := rootio.WriteFile(path, h1, h2); err != nil {
		return nil, err
	}
	return []string{RootFile}, nil
}

// rootHistograms makes the ROOT histograms of the result: for every
// region one TH1D per slice along its last axis (the whole region for a
// 1-D one), of counts and of densities, and a TH2D of counts and one of
// densities for each rectangular 2-D region. Flow bins of the scheme go
// into ROOT's flow cells of the slice histograms and of the TH2D.
func rootHistograms(s *binning.Scheme, est, unc, dens, densUnc []float64) ([]*rootio.Hist1D, []*rootio.Hist2D) {
	var h1 []*rootio.Hist1D
	var h2 []*rootio.Hist2D
	val := func(g int, v []float64) float64 {
		if g < 0 || v == nil {
			return 0
		}
		return v[g]
	}
	for _, sl := range Slices(s) {
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

// correlationHistograms makes one TH2D per region of s, REGION/correlation,
// of the correlation matrix rho between the region's bins (regionBins
// order, numbered 0, 1, ... along both axes); none when rho is nil.
func correlationHistograms(s *binning.Scheme, rho [][]float64) []*rootio.Hist2D {
	if rho == nil {
		return nil
	}
	var h2 []*rootio.Hist2D
	for k, reg := range s.Regions() {
		g := regionBins(s, k)
		edges := make([]float64, len(g)+1)
		for i := range edges {
			edges[i] = float64(i)
		}
		h := rootio.NewHist2D(reg.Name()+"/correlation", edges, edges)
		h.Title = reg.Name() + " correlation (in-range bins, then flow bins, in global order)"
		h.Entries = float64(len(g) * len(g))
		for iy, gy := range g {
			for ix, gx := range g {
				h.SumW[h.Index(ix+1, iy+1)] = rho[gx][gy]
			}
		}
		h2 = append(h2, h)
	}
	return h2
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
