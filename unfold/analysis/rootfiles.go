package analysis

import (
	"fmt"
	"math"

	"github.com/desmear/desmear/unfold/internal/rootio"
)

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
			if err := put(m, h.SumW[c], h.SumW2[c], a.Reco.Global(0, rootio.BinOf(c, n))); err != nil {
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
				if err := put(m, h.SumW[c], h.SumW2[c], a.Reco.Global(0, rootio.BinOf(ix, nx), rootio.BinOf(iy, ny))); err != nil {
					return nil, where(fmt.Errorf("%s cell (%d,%d): %v", d.Name, ix, iy, err))
				}
			}
		}
		hasW2 = h.HasSumW2
	}
	if !hasW2 {
		m.Variance = nil
	}
	m.outsideFraction()
	return m, nil
}

// outsideFraction sets OutsideFraction from OutsideContent and Values.
func (m *Measured) outsideFraction() {
	if m.OutsideContent == 0 {
		return
	}
	total := m.OutsideContent
	for _, v := range m.Values {
		total += v
	}
	if total != 0 {
		m.OutsideFraction = m.OutsideContent / total
	}
}

func put(m *Measured, w, w2 float64, g int) error {
	if math.IsNaN(w) || math.IsInf(w, 0) || w < 0 {
		return fmt.Errorf("content %v is not a count ≥ 0", w)
	}
	if g < 0 {
		if w != 0 {
			m.Outside++
			m.OutsideContent += w
		}
		return nil
	}
	m.Values[g] += w
	m.Variance[g] += w2
	return nil
}
