package result

import (
	"bytes"
	"encoding/xml"
	"errors"
	"image/png"
	"io"
	"math"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold/result/figure"
)

// The uncertainty breakdown handed to the plotter is the result's: per
// slice, the total and each source's uncertainty divided by the
// estimate, at the slice's bin edges (NaN, not drawn, where the bin is
// not determined); the sources add in quadrature to the total (method.md
// §18 Sources of uncertainty and their total). The figure renders to a
// PNG that decodes and an SVG that parses as XML.
func TestBreakdownPlot(t *testing.T) {
	ur, s := sourcesResult(t)
	r, err := FromUnfold(ur)
	if err != nil {
		t.Fatal(err)
	}
	var p *Plot
	for _, q := range Plots(r, s) {
		if q.Name == "uncertainty_all" {
			p = &q
		}
	}
	if p == nil {
		t.Fatal("no uncertainty_all plot")
	}
	c := p.Figure.(*figure.Chart)
	steps := c.Panels[0].Steps
	var names []string
	for _, st := range steps {
		names = append(names, st.Name)
		if !slices.Equal(st.Edges, []float64{0, 1, 2, 3}) {
			t.Errorf("%s: edges %v", st.Name, st.Edges)
		}
	}
	if !slices.Equal(names, []string{"total", "data", "tilt", "energy scale"}) || c.XLabel != "x [GeV]" {
		t.Fatalf("series %v, x label %q", names, c.XLabel)
	}
	// Independently of the document: the data uncertainties 2 and 3, the
	// shifts (1, −2) and (0.5, 2) of sourcesResult, the estimates 10, 20.
	parts := [][]float64{{2, 3}, {1, 2}, {0.5, 2}}
	for j, mu := range []float64{10, 20} {
		sum := 0.0
		for k, u := range parts {
			if got := steps[1+k].Y[j]; !close(got, u[j]/mu) {
				t.Errorf("%s bin %d: %v, want %v", names[1+k], j, got, u[j]/mu)
			}
			sum += u[j] * u[j]
		}
		if got := steps[0].Y[j]; !close(got, math.Sqrt(sum)/mu) {
			t.Errorf("total bin %d: %v, want %v", j, got, math.Sqrt(sum)/mu)
		}
	}
	for _, st := range steps {
		if !math.IsNaN(st.Y[2]) {
			t.Errorf("%s: the undetermined bin is %v, want NaN", st.Name, st.Y[2])
		}
	}
	b, err := figure.Render(p.Figure, figure.PNG)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := png.Decode(bytes.NewReader(b)); err != nil {
		t.Errorf("PNG: %v", err)
	}
	if b, err = figure.Render(p.Figure, figure.SVG); err != nil {
		t.Fatal(err)
	}
	dec, root := xml.NewDecoder(bytes.NewReader(b)), ""
	for {
		tok, err := dec.Token()
		if errors.Is(err, io.EOF) {
			break
		}
		if err != nil {
			t.Fatalf("SVG: %v", err)
		}
		if se, ok := tok.(xml.StartElement); ok && root == "" {
			root = se.Name.Local
		}
	}
	if root != "svg" {
		t.Errorf("SVG root element %q", root)
	}

	// Without a truth binning: one chart over the global index.
	var global *figure.Chart
	for _, q := range Plots(r, nil) {
		if q.Name == "uncertainty" {
			global = q.Figure.(*figure.Chart)
		}
	}
	if global == nil || !close(global.Panels[0].Steps[2].Y[1], 2.0/20) {
		t.Errorf("global breakdown %+v", global)
	}
	// With the data's source alone there is nothing to break down.
	r.Sources = r.Sources[:1]
	for _, q := range Plots(r, s) {
		if q.Name == "uncertainty_all" {
			t.Error("a breakdown of a single source")
		}
	}
}
