package figure

import (
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Chart is a figure of one or more panels stacked top to bottom and
// sharing the x axis: the first is the main panel, each other one (a
// ratio, pulls) a third of its height.
type Chart struct {
	Title  string
	XLabel string
	// XMin and XMax fix the x range; both 0 means the data's.
	XMin, XMax float64
	Panels     []Panel
	// Width and Height default to 16 × 11 cm, plus 4 cm per extra panel.
	Width, Height vg.Length
}

// Panel is one panel of a chart.
type Panel struct {
	YLabel string
	// LogY draws the y axis logarithmically; values ≤ 0 are left out
	// (points) or drawn at the bottom of the panel (step lines).
	LogY bool
	// YMin and YMax fix the y range; both 0 means the data's.
	YMin, YMax float64
	Points     []Points
	Steps      []Steps
	Lines      []Line
	// HLines are horizontal reference lines (1 for a ratio, 0 for
	// pulls); VLines vertical boundaries (regions, slices).
	HLines, VLines []float64
}

// Points are markers at (X, Y) with error bars of half-widths XErr and
// YErr (nil for none). Points whose Y is not finite are left out.
type Points struct {
	Name       string
	X, Y       []float64
	XErr, YErr []float64
}

// Steps is a histogram outline: Y[i] between Edges[i] and Edges[i+1].
type Steps struct {
	Name  string
	Edges []float64
	Y     []float64
}

// Line joins the points (X, Y); points whose Y is not finite (or ≤ 0 on
// a logarithmic axis) are left out.
type Line struct {
	Name string
	X, Y []float64
}

// Size returns the chart's size.
func (c *Chart) Size() (w, h vg.Length) {
	w, h = c.Width, c.Height
	if w == 0 {
		w = 16 * vg.Centimeter
	}
	if h == 0 {
		h = 11*vg.Centimeter + vg.Length(max(len(c.Panels)-1, 0))*4*vg.Centimeter
	}
	return w, h
}

func (c *Chart) draw(dc draw.Canvas) error {
	plots := make([]*plot.Plot, len(c.Panels))
	for k := range c.Panels {
		p, err := c.Panels[k].plot()
		if err != nil {
			return err
		}
		if c.XMin != 0 || c.XMax != 0 {
			p.X.Min, p.X.Max = c.XMin, c.XMax
		}
		if k == 0 {
			p.Title.Text = c.Title
		}
		if k == len(c.Panels)-1 {
			p.X.Tick.Marker = ticks{}
			p.X.Label.Text = c.XLabel
			p.X.Label.TextStyle.Font.Size = vg.Points(10)
		} else {
			p.X.Tick.Marker = ticks{blank: true}
		}
		plots[k] = p
	}
	// All panels share the x range of the first.
	xmin, xmax := math.Inf(1), math.Inf(-1)
	for _, p := range plots {
		xmin, xmax = math.Min(xmin, p.X.Min), math.Max(xmax, p.X.Max)
	}
	for _, p := range plots {
		p.X.Min, p.X.Max = xmin, xmax
	}
	// Heights: 3 for the main panel, 1 for each other.
	total := vg.Length(3 + len(plots) - 1)
	height := dc.Max.Y - dc.Min.Y
	top := dc.Max.Y
	canvases := make([]draw.Canvas, len(plots))
	for k := range plots {
		share := vg.Length(1)
		if k == 0 {
			share = 3
		}
		h := height * share / total
		canvases[k] = draw.Crop(dc, 0, 0, top-h-dc.Min.Y, top-dc.Max.Y)
		top -= h
	}
	// Line up the data areas: the widest left and right margins for all.
	var left, right vg.Length
	for k, p := range plots {
		d := p.DataCanvas(canvases[k])
		left = max(left, d.Min.X-canvases[k].Min.X)
		right = max(right, canvases[k].Max.X-d.Max.X)
	}
	for k, p := range plots {
		d := p.DataCanvas(canvases[k])
		cv := draw.Crop(canvases[k], left-(d.Min.X-canvases[k].Min.X), -(right - (canvases[k].Max.X - d.Max.X)), 0, 0)
		p.Draw(cv)
	}
	return nil
}

// plot builds the gonum plot of the panel.
func (pn *Panel) plot() (*plot.Plot, error) {
	p := plot.New()
	p.Y.Label.Text = pn.YLabel
	p.Y.Label.TextStyle.Font.Size = vg.Points(10)
	p.Legend.Top = true
	p.Legend.TextStyle.Font.Size = vg.Points(9)
	ok := func(y float64) bool { return finite(y) && (!pn.LogY || y > 0) }
	// The floor of a logarithmic panel: a third of the smallest positive
	// value drawn.
	floor := math.Inf(1)
	var ymin, ymax = math.Inf(1), math.Inf(-1)
	var xmin, xmax = math.Inf(1), math.Inf(-1)
	see := func(x, y float64) {
		if ok(y) {
			ymin, ymax = math.Min(ymin, y), math.Max(ymax, y)
			if y > 0 {
				floor = math.Min(floor, y/3)
			}
		}
		if finite(x) {
			xmin, xmax = math.Min(xmin, x), math.Max(xmax, x)
		}
	}
	for _, s := range pn.Points {
		for i := range s.Y {
			see(s.X[i], s.Y[i])
		}
	}
	for _, s := range pn.Steps {
		for i := range s.Y {
			see(s.Edges[i], s.Y[i])
			see(s.Edges[i+1], s.Y[i])
		}
	}
	for _, s := range pn.Lines {
		for i := range s.Y {
			see(s.X[i], s.Y[i])
		}
	}
	if math.IsInf(floor, 1) {
		floor = 1
	}
	style := 0
	for _, s := range pn.Points {
		var xys plotter.XYs
		var xerr plotter.XErrors
		var yerr plotter.YErrors
		for i, y := range s.Y {
			if !ok(y) || !finite(s.X[i]) {
				continue
			}
			xys = append(xys, plotter.XY{X: s.X[i], Y: y})
			ex, ey := 0.0, 0.0
			if s.XErr != nil {
				ex = s.XErr[i]
			}
			if s.YErr != nil && finite(s.YErr[i]) {
				ey = s.YErr[i]
			}
			lo, hi := ey, ey
			if pn.LogY && y-lo < floor {
				lo = y - floor
			}
			if pn.YMin != 0 || pn.YMax != 0 {
				// A fixed range: the error bars end at its limits.
				lo, hi = math.Max(math.Min(lo, y-pn.YMin), 0), math.Max(math.Min(hi, pn.YMax-y), 0)
			}
			xerr = append(xerr, struct{ Low, High float64 }{ex, ex})
			yerr = append(yerr, struct{ Low, High float64 }{lo, hi})
			see(s.X[i], y+ey)
		}
		col, glyph := pick(colors, style), pick(glyphs, style)
		style++
		if len(xys) == 0 {
			continue
		}
		sc, err := plotter.NewScatter(xys)
		if err != nil {
			return nil, err
		}
		sc.GlyphStyle.Color, sc.GlyphStyle.Shape, sc.GlyphStyle.Radius = col, glyph, vg.Points(2.5)
		eb, err := plotter.NewYErrorBars(struct {
			plotter.XYs
			plotter.YErrors
		}{xys, yerr})
		if err != nil {
			return nil, err
		}
		eb.LineStyle.Color, eb.CapWidth = col, vg.Points(3)
		xb, err := plotter.NewXErrorBars(struct {
			plotter.XYs
			plotter.XErrors
		}{xys, xerr})
		if err != nil {
			return nil, err
		}
		xb.LineStyle.Color, xb.CapWidth = col, 0
		p.Add(xb, eb, sc)
		if s.Name != "" {
			p.Legend.Add(s.Name, sc)
		}
	}
	for _, s := range pn.Steps {
		var xys plotter.XYs
		for i, y := range s.Y {
			if !finite(y) {
				continue
			}
			if pn.LogY && y < floor {
				y = floor
			}
			xys = append(xys, plotter.XY{X: s.Edges[i], Y: y}, plotter.XY{X: s.Edges[i+1], Y: y})
		}
		col, dash := pick(colors, style), pick(dashes, style)
		style++
		if len(xys) == 0 {
			continue
		}
		l, err := plotter.NewLine(xys)
		if err != nil {
			return nil, err
		}
		l.LineStyle.Color, l.LineStyle.Dashes, l.LineStyle.Width = col, dash, vg.Points(1.2)
		p.Add(l)
		if s.Name != "" {
			p.Legend.Add(s.Name, l)
		}
	}
	for _, s := range pn.Lines {
		var xys plotter.XYs
		for i, y := range s.Y {
			if ok(y) && finite(s.X[i]) {
				xys = append(xys, plotter.XY{X: s.X[i], Y: y})
			}
		}
		col, dash, glyph := pick(colors, style), pick(dashes, style), pick(glyphs, style)
		style++
		if len(xys) == 0 {
			continue
		}
		l, sc, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, err
		}
		l.LineStyle.Color, l.LineStyle.Dashes = col, dash
		sc.GlyphStyle.Color, sc.GlyphStyle.Shape = col, glyph
		p.Add(l, sc)
		if s.Name != "" {
			p.Legend.Add(s.Name, l, sc)
		}
	}
	grey := draw.LineStyle{Color: pick(colors, 0), Width: vg.Points(0.5), Dashes: []vg.Length{vg.Points(2), vg.Points(2)}}
	if len(pn.HLines) > 0 {
		p.Add(&rule{at: pn.HLines, style: grey})
	}
	if len(pn.VLines) > 0 {
		p.Add(&rule{vertical: true, at: pn.VLines, style: draw.LineStyle{Color: pick(colors, 0), Width: vg.Points(0.8)}})
	}
	// Ranges: the data's, or fixed; never empty.
	if math.IsInf(ymin, 1) {
		ymin, ymax = 0, 1
		if pn.LogY {
			ymin, ymax = 1, 10
		}
	}
	if pn.LogY {
		ymin = math.Min(ymin, floor)
		p.Y.Scale = plot.LogScale{}
		p.Y.Tick.Marker = plot.LogTicks{Prec: -1}
	}
	if ymin == ymax {
		ymin, ymax = ymin-0.5, ymax+0.5
		if pn.LogY {
			ymin, ymax = ymin/2+0.25, 2*ymax
		}
	}
	switch {
	case pn.YMin != 0 || pn.YMax != 0:
		ymin, ymax = pn.YMin, pn.YMax
	case pn.LogY:
		ymax *= 3 // room for the legend
	default:
		ymax += 0.25 * (ymax - ymin)
	}
	p.Y.Min, p.Y.Max = ymin, ymax
	if math.IsInf(xmin, 1) {
		xmin, xmax = 0, 1
	}
	if xmin == xmax {
		xmin, xmax = xmin-0.5, xmax+0.5
	}
	p.X.Min, p.X.Max = xmin, xmax
	return p, nil
}

// rule draws lines across the data area at the values at (vertical
// lines at x values, or horizontal ones at y values).
type rule struct {
	vertical bool
	at       []float64
	style    draw.LineStyle
}

func (r *rule) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	for _, v := range r.at {
		if r.vertical {
			if v <= p.X.Min || v >= p.X.Max {
				continue
			}
			x := trX(v)
			c.StrokeLine2(r.style, x, c.Min.Y, x, c.Max.Y)
		} else {
			if v <= p.Y.Min || v >= p.Y.Max {
				continue
			}
			y := trY(v)
			c.StrokeLine2(r.style, c.Min.X, y, c.Max.X, y)
		}
	}
}
