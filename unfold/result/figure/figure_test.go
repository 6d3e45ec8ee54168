package figure

import (
	"bytes"
	"encoding/xml"
	"image/png"
	"io"
	"math"
	"testing"
)

// checkFile decodes a PNG and parses an SVG as XML, and checks the PNG
// has the size of the figure at DPI.
func checkFile(t *testing.T, name string, f Figure) {
	t.Helper()
	for _, format := range []string{PNG, SVG} {
		data, err := Render(f, format)
		if err != nil {
			t.Fatalf("%s %s: %v", name, format, err)
		}
		switch format {
		case PNG:
			img, err := png.Decode(bytes.NewReader(data))
			if err != nil {
				t.Fatalf("%s: the PNG does not decode: %v", name, err)
			}
			w, h := f.Size()
			if b := img.Bounds(); math.Abs(float64(b.Dx())-w.Dots(DPI)) > 1 || math.Abs(float64(b.Dy())-h.Dots(DPI)) > 1 {
				t.Errorf("%s: PNG of %v, want %.0f×%.0f", name, b, w.Dots(DPI), h.Dots(DPI))
			}
		case SVG:
			dec := xml.NewDecoder(bytes.NewReader(data))
			root := ""
			for {
				tok, err := dec.Token()
				if err == io.EOF {
					break
				}
				if err != nil {
					t.Fatalf("%s: the SVG does not parse: %v", name, err)
				}
				if se, ok := tok.(xml.StartElement); ok && root == "" {
					root = se.Name.Local
				}
			}
			if root != "svg" {
				t.Errorf("%s: SVG root element %q", name, root)
			}
		}
	}
}

// Charts and heat maps render as PNG and SVG, also with empty panels,
// zero and NaN values on logarithmic axes, and empty matrices: a report
// never fails on empty or zero bins.
func TestRender(t *testing.T) {
	edges := []float64{20, 25, 32.5, 50, 100}
	nan := math.NaN()
	for name, f := range map[string]Figure{
		"spectrum": &Chart{Title: "t", XLabel: "pt [GeV]", Panels: []Panel{
			{YLabel: "density", LogY: true, Points: []Points{{Name: "unfolded", X: []float64{22.5, 28.75, 41.25, 75}, Y: []float64{100, 0, 3, nan}, XErr: []float64{2.5, 3.75, 8.75, 25}, YErr: []float64{10, 1, 5, 1}}},
				Steps: []Steps{{Name: "simulation", Edges: edges, Y: []float64{90, 20, 0, 0.5}}}, VLines: []float64{50}},
			{YLabel: "ratio", HLines: []float64{1}, Points: []Points{{X: []float64{22.5}, Y: []float64{1.1}, YErr: []float64{0.1}}}},
		}},
		"empty": &Chart{Panels: []Panel{{LogY: true}, {}}},
		"zeros": &Chart{Panels: []Panel{{LogY: true, Steps: []Steps{{Edges: edges, Y: []float64{0, 0, 0, 0}}}, Lines: []Line{{X: []float64{0, 1}, Y: []float64{0, 0}}}}}},
		"heat":  &Heat{Title: "h", ZLabel: "z", Z: [][]float64{{1, 0.2, nan}, {0.1, 0.9, 0}}, Min: 0, Max: 1, XBounds: []float64{2}, YBounds: []float64{1}},
		"big":   &Heat{Z: bigGrid(80), Min: -1, Max: 1},
		"none":  &Heat{},
	} {
		checkFile(t, name, f)
	}
}

func bigGrid(n int) [][]float64 {
	z := make([][]float64, n)
	for i := range z {
		z[i] = make([]float64, n)
		for j := range z[i] {
			z[i][j] = math.Cos(float64(i - j))
		}
	}
	return z
}
