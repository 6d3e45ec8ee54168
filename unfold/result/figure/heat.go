package figure

import (
	"image/color"
	"math"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Heat is a heat map of a matrix with a colour bar: cell (row, col)
// covers [col, col+1) × [row, row+1), so that axes count cells (bins in
// global-index order). NaN cells are left white.
type Heat struct {
	Title, XLabel, YLabel string
	// ZLabel names the colour bar.
	ZLabel string
	// Z holds the rows of the matrix, bottom row first.
	Z [][]float64
	// Min and Max are the range of the colours.
	Min, Max float64
	// XBounds and YBounds are cell boundaries to mark (region and slice
	// boundaries), in cell units.
	XBounds, YBounds []float64
	// Width and Height default to 16 × 14 cm.
	Width, Height vg.Length
}

// Size returns the heat map's size.
func (h *Heat) Size() (w, ht vg.Length) {
	w, ht = h.Width, h.Height
	if w == 0 {
		w = 16 * vg.Centimeter
	}
	if ht == 0 {
		ht = 14 * vg.Centimeter
	}
	return w, ht
}

type grid [][]float64

func (g grid) Dims() (c, r int) {
	if len(g) == 0 {
		return 0, 0
	}
	return len(g[0]), len(g)
}
func (g grid) Z(c, r int) float64 { return g[r][c] }
func (g grid) X(c int) float64    { return float64(c) + 0.5 }
func (g grid) Y(r int) float64    { return float64(r) + 0.5 }

func (h *Heat) draw(dc draw.Canvas) error {
	cols, rows := grid(h.Z).Dims()
	p := plot.New()
	p.Title.Text, p.X.Label.Text, p.Y.Label.Text = h.Title, h.XLabel, h.YLabel
	p.X.Tick.Marker, p.Y.Tick.Marker = ticks{}, ticks{}
	p.X.Min, p.X.Max = 0, math.Max(float64(cols), 1)
	p.Y.Min, p.Y.Max = 0, math.Max(float64(rows), 1)
	lo, hi := h.Min, h.Max
	if !(hi > lo) {
		hi = lo + 1
	}
	if cols > 0 && rows > 0 {
		hm := plotter.NewHeatMap(grid(h.Z), heatMap().Palette(256))
		hm.Min, hm.Max = lo, hi
		hm.NaN = color.White
		hm.Underflow, hm.Overflow = color.White, color.White
		hm.Rasterized = cols*rows > 2500
		p.Add(hm)
	}
	line := draw.LineStyle{Color: color.RGBA{0xD5, 0x5E, 0, 255}, Width: vg.Points(1)}
	if len(h.XBounds) > 0 {
		p.Add(&rule{vertical: true, at: h.XBounds, style: line})
	}
	if len(h.YBounds) > 0 {
		p.Add(&rule{at: h.YBounds, style: line})
	}
	barW := 2.4 * vg.Centimeter
	main := draw.Crop(dc, 0, -barW, 0, 0)
	p.Draw(main)
	d := p.DataCanvas(main)
	bar := plot.New()
	cm := heatMap()
	cm.SetMin(lo)
	cm.SetMax(hi)
	bar.Add(&plotter.ColorBar{ColorMap: cm, Vertical: true})
	bar.HideX()
	bar.Y.Label.Text = h.ZLabel
	bar.Y.Padding = 0
	bc := draw.Crop(dc, dc.Max.X-dc.Min.X-barW+vg.Points(6), 0, d.Min.Y-dc.Min.Y, d.Max.Y-dc.Max.Y)
	bar.Draw(bc)
	return nil
}

// ticks are the default ticks labelled in the shortest form (bin
// numbers without decimals), or without labels (the x axis of the upper
// panels of a chart).
type ticks struct{ blank bool }

func (tk ticks) Ticks(min, max float64) []plot.Tick {
	t := plot.DefaultTicks{}.Ticks(min, max)
	for i := range t {
		switch {
		case tk.blank:
			t[i].Label = ""
		case t[i].Label != "":
			t[i].Label = strconv.FormatFloat(t[i].Value, 'g', 6, 64)
		}
	}
	return t
}
