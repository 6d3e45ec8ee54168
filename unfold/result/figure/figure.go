package figure

import (
	"bytes"
	"fmt"
	"image/color"
	"math"

	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Figure is something this package draws.
type Figure interface {
	// Size returns the width and height of the figure.
	Size() (w, h vg.Length)
	draw(c draw.Canvas) error
}

// Formats of Render.
const (
	PNG = "png"
	SVG = "svg"
)

// DPI is the resolution of the PNG files.
const DPI = 96

// Render draws f in the format PNG or SVG and returns the file's bytes.
// Panics in the plotting library (which it raises on data it cannot
// draw) are returned as errors.
func Render(f Figure, format string) (out []byte, err error) {
	defer func() {
		if p := recover(); p != nil {
			out, err = nil, fmt.Errorf("figure: %v", p)
		}
	}()
	w, h := f.Size()
	var buf bytes.Buffer
	switch format {
	case PNG:
		c := vgimg.PngCanvas{Canvas: vgimg.NewWith(vgimg.UseWH(w, h), vgimg.UseDPI(DPI), vgimg.UseBackgroundColor(color.White))}
		if err := f.draw(draw.New(c)); err != nil {
			return nil, err
		}
		if _, err := c.WriteTo(&buf); err != nil {
			return nil, err
		}
	case SVG:
		c := vgsvg.New(w, h)
		dc := draw.New(c)
		dc.SetColor(color.White)
		dc.Fill(dc.Rectangle.Path())
		if err := f.draw(dc); err != nil {
			return nil, err
		}
		if _, err := c.WriteTo(&buf); err != nil {
			return nil, err
		}
	default:
		return nil, fmt.Errorf("figure: unknown format %q", format)
	}
	return buf.Bytes(), nil
}

// The Okabe–Ito colours, in the order series get them.
var colors = []color.Color{
	color.RGBA{0, 0, 0, 255},       // black
	color.RGBA{0xE6, 0x9F, 0, 255}, // orange
	color.RGBA{0, 0x72, 0xB2, 255}, // blue
	color.RGBA{0, 0x9E, 0x73, 255}, // bluish green
	color.RGBA{0xD5, 0x5E, 0, 255}, // vermillion
	color.RGBA{0xCC, 0x79, 0xA7, 255},
	color.RGBA{0x56, 0xB4, 0xE9, 255},
}

// Markers and dash patterns, in the order series get them.
var (
	glyphs = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.TriangleGlyph{}, draw.BoxGlyph{}, draw.RingGlyph{}, draw.PyramidGlyph{}, draw.CrossGlyph{}, draw.PlusGlyph{}}
	dashes = [][]vg.Length{nil, {vg.Points(5), vg.Points(3)}, {vg.Points(1.5), vg.Points(2)}, {vg.Points(6), vg.Points(2), vg.Points(1.5), vg.Points(2)}}
)

func pick[T any](v []T, i int) T { return v[i%len(v)] }

// heatMap returns the colour map of the heat maps: blue to yellow
// through grey, of increasing lightness.
func heatMap() palette.ColorMap {
	m, err := moreland.NewLuminance([]color.Color{
		color.RGBA{0x00, 0x20, 0x4D, 255},
		color.RGBA{0x41, 0x4D, 0x6B, 255},
		color.RGBA{0x7C, 0x7B, 0x78, 255},
		color.RGBA{0xBC, 0xAF, 0x6F, 255},
		color.RGBA{0xFF, 0xEA, 0x46, 255},
	})
	if err != nil {
		panic(err) // the controls above are of increasing lightness
	}
	return m
}

// finite reports whether v is a finite number.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
