package analysis

import (
	"fmt"
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// rootCell maps a ROOT cell number along an axis of n bins (0 the
// underflow, 1..n the bins, n+1 the overflow) to a binning bin number.
func rootCell(c, n int) int {
	switch {
	case c == 0:
		return binning.UnderflowBin
	case c == n+1:
		return binning.OverflowBin
	}
	return c - 1
}

func sameEdges(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if math.Abs(a[i]-b[i]) > 1e-9*math.Max(1, math.Abs(b[i])) {
			return false
		}
	}
	return true
}

// readHistogram reads the data from a ROOT TH1D/TH2D whose edges match
// the reco scheme's single rectangular region. Cells of flows the scheme
// switches off must be empty; they are counted in Measured.Outside
// (number of non-empty cells) and left out.
func (a *Analysis) readHistogram() (*Measured, error) {
	d := &a.Data
	reg := a.Reco.Regions()[0]
	axes := reg.Axes()
	where := func(err error) error {
		return &Error{File: a.File, Line: d.Line, Field: "data.histogram", Msg: err.Error(), Err: err}
	}
	nr := a.Reco.Len()
	m := &Measured{Values: make([]float64, nr), Variance: make([]float64, nr)}
	var hasW2 bool
	switch len(axes) {
	case 1:
		h, err := rootio.ReadHist1D(d.File, d.Name)
		if err != nil {
			return nil, where(err)
		}
		if !sameEdges(h.Edges, axes[0].Edges()) {
			return nil, where(fmt.Errorf("the edges of %s in %s, %v, differ from those of reco axis %s, %v", d.Name, d.File, h.Edges, axes[0].Name(), axes[0].Edges()))
		}
		n := h.NBins()
		for c := 0; c < n+2; c++ {
			if err := put(m, h.SumW[c], h.SumW2[c], a.Reco.Global(0, rootCell(c, n))); err != nil {
				return nil, where(fmt.Errorf("%s cell %d: %v", d.Name, c, err))
			}
		}
		hasW2 = h.HasSumW2
	case 2:
		h, err := rootio.ReadHist2D(d.File, d.Name)
		if err != nil {
			return nil, where(err)
		}
		if !sameEdges(h.XEdges, axes[0].Edges()) || !sameEdges(h.YEdges, axes[1].Edges()) {
			return nil, where(fmt.Errorf("the edges of %s in %s differ from those of the reco axes %s and %s", d.Name, d.File, axes[0].Name(), axes[1].Name()))
		}
		nx, ny := h.NBins()
		for iy := 0; iy < ny+2; iy++ {
			for ix := 0; ix < nx+2; ix++ {
				c := h.Index(ix, iy)
				if err := put(m, h.SumW[c], h.SumW2[c], a.Reco.Global(0, rootCell(ix, nx), rootCell(iy, ny))); err != nil {
					return nil, where(fmt.Errorf("%s cell (%d,%d): %v", d.Name, ix, iy, err))
				}
			}
		}
		hasW2 = h.HasSumW2
	}
	if !hasW2 {
		m.Variance = nil
	}
	return m, nil
}

func put(m *Measured, w, w2 float64, g int) error {
	if math.IsNaN(w) || math.IsInf(w, 0) || w < 0 {
		return fmt.Errorf("content %v is not a count ≥ 0", w)
	}
	if g < 0 {
		if w != 0 {
			m.Outside++
		}
		return nil
	}
	m.Values[g] += w
	m.Variance[g] += w2
	return nil
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
	for r, reg := range s.Regions() {
		axes := reg.Axes()
		last := axes[len(axes)-1]
		// Enumerate the outer bins (all axes but the last), in-range only.
		var outer [][]int
		var rec func(prefix []int, k int)
		rec = func(prefix []int, k int) {
			if k == len(axes)-1 {
				outer = append(outer, append([]int(nil), prefix...))
				return
			}
			prev := 0
			if len(prefix) > 0 {
				prev = prefix[len(prefix)-1]
			}
			for i := 0; i < axes[k].Bins(prev); i++ {
				rec(append(prefix, i), k+1)
			}
		}
		rec(nil, 0)
		for _, o := range outer {
			prev := 0
			if len(o) > 0 {
				prev = o[len(o)-1]
			}
			edges := last.EdgesIn(prev)
			// Names: REGION/counts for a 1-D region, REGION/counts_y0 for
			// outer bin 0 of axis y, REGION/counts_y0_x2 in 3-D.
			suffix := ""
			for k, i := range o {
				if k > 0 {
					suffix += "_"
				}
				suffix += fmt.Sprintf("%s%d", axes[k].Name(), i)
			}
			if suffix != "" {
				suffix = "_" + suffix
			}
			n := len(edges) - 1
			hc := rootio.NewHist1D(reg.Name()+"/counts"+suffix, edges)
			hd := rootio.NewHist1D(reg.Name()+"/density"+suffix, edges)
			hc.Title, hd.Title = title(s, r, o, "counts"), title(s, r, o, "density")
			for c := 0; c < n+2; c++ {
				g := s.Global(r, append(append([]int(nil), o...), rootCell(c, n))...)
				hc.SumW[c], hc.SumW2[c] = val(g, est), sq(val(g, unc))
				if c >= 1 && c <= n {
					hd.SumW[c], hd.SumW2[c] = val(g, dens), sq(val(g, densUnc))
				}
			}
			h1 = append(h1, hc, hd)
		}
		if len(axes) == 2 && reg.Rectangular() {
			xe, ye := axes[0].Edges(), axes[1].Edges()
			hc := rootio.NewHist2D(reg.Name()+"/counts2d", xe, ye)
			hd := rootio.NewHist2D(reg.Name()+"/density2d", xe, ye)
			hc.Title, hd.Title = reg.Name()+" counts", reg.Name()+" density"
			nx, ny := len(xe)-1, len(ye)-1
			for iy := 0; iy < ny+2; iy++ {
				for ix := 0; ix < nx+2; ix++ {
					c := hc.Index(ix, iy)
					g := s.Global(r, rootCell(ix, nx), rootCell(iy, ny))
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

func title(s *binning.Scheme, r int, outer []int, what string) string {
	reg := s.Regions()[r]
	t := reg.Name() + " " + what
	axes := reg.Axes()
	prev := 0
	for k, i := range outer {
		e := axes[k].EdgesIn(prev)
		t += fmt.Sprintf(" %s[%g,%g)", axes[k].Name(), e[i], e[i+1])
		prev = i
	}
	return t
}
