package result

import (
	"bytes"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result/figure"
)

// plotsResult returns the result of problem D (diagnosticsProblem) on a
// truth binning of two regions: a 1-D one of two bins and one of one
// bin.
func plotsResult(t *testing.T) (*Result, *binning.Scheme) {
	t.Helper()
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: pt, unit: GeV, edges: [20, 25, 40]}
  - name: f
    axes:
      - {name: pt, unit: GeV, edges: [0, 10]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	r := diagnosticsProblem(t)
	r.Generated = []float64{2, 1, 4}
	r.TruthBinning = DescribeBinning(s, "s.yaml")
	return r, s
}

func close(a, b float64) bool { return math.Abs(a-b) <= 1e-12*math.Max(1, math.Abs(b)) }

// The series handed to the plotter are those of the result: the
// spectrum is the density estimate/volume at the bin centres with
// half-widths of the bin (common practice), the simulation truth scaled
// to the estimate's total and its ratio; the efficiency; the data with
// sqrt(var n + var b), the folded expectation and the pulls (method.md
// §16 Folded comparison); the history; R_ij = A_ij / G_j (method.md §2)
// and the correlation matrix.
func TestPlotsData(t *testing.T) {
	r, s := plotsResult(t)
	plots := map[string]Plot{}
	for _, p := range Plots(r, s) {
		plots[p.Name] = p
	}
	for _, name := range []string{"spectrum_c", "spectrum_f", "efficiency", "folded", "history", "response", "correlation"} {
		if _, ok := plots[name]; !ok {
			t.Fatalf("no plot %s among %v", name, plots)
		}
	}
	sumMu := r.Estimate[0] + r.Estimate[1] + r.Estimate[2]
	k := sumMu / 7
	c := plots["spectrum_c"].Figure.(*figure.Chart)
	pts, sim, ratio := c.Panels[0].Points[0], c.Panels[0].Steps[0], c.Panels[1].Points[0]
	for i, w := range []float64{5, 15} {
		lo := []float64{20, 25}[i]
		if pts.X[i] != lo+w/2 || pts.XErr[i] != w/2 || !close(pts.Y[i], r.Estimate[i]/w) || !close(pts.YErr[i], r.Uncertainty[i]/w) {
			t.Errorf("spectrum bin %d: x %v ± %v, y %v ± %v", i, pts.X[i], pts.XErr[i], pts.Y[i], pts.YErr[i])
		}
		if !close(sim.Y[i], k*r.Generated[i]/w) || !close(ratio.Y[i], pts.Y[i]/sim.Y[i]) {
			t.Errorf("spectrum bin %d: simulation %v, ratio %v", i, sim.Y[i], ratio.Y[i])
		}
	}
	if c.XMin != 20 || c.XMax != 40 || c.XLabel != "pt [GeV]" || len(sim.Edges) != 3 {
		t.Errorf("spectrum axis %v..%v %q, edges %v", c.XMin, c.XMax, c.XLabel, sim.Edges)
	}
	if e := plots["efficiency"].Figure.(*figure.Chart).Panels[0].Points[0]; !slices.Equal(e.Y, r.Efficiency) {
		t.Errorf("efficiency %v, want %v", e.Y, r.Efficiency)
	}
	f := plots["folded"].Figure.(*figure.Chart)
	data, folded, pulls := f.Panels[0].Points[0], f.Panels[0].Steps[0], f.Panels[1].Points[0]
	for i := range r.Data {
		if data.Y[i] != r.Data[i] || !close(data.YErr[i], math.Sqrt(r.Data[i]+r.BackgroundVariance[i])) || folded.Y[i] != r.Folded[i] ||
			!close(pulls.Y[i], (r.Data[i]-r.Folded[i])/data.YErr[i]) {
			t.Errorf("folded bin %d: data %v ± %v, folded %v, pull %v", i, data.Y[i], data.YErr[i], folded.Y[i], pulls.Y[i])
		}
	}
	h := plots["history"].Figure.(*figure.Chart).Panels[0].Lines[0]
	for k, st := range r.History {
		if h.X[k] != float64(st.Iteration) || h.Y[k] != st.Chi2 {
			t.Errorf("history %d: %v %v", k, h.X[k], h.Y[k])
		}
	}
	resp := plots["response"].Figure.(*figure.Heat)
	if len(resp.Z) != 4 || !close(resp.Z[1][0], 0.20/2) || !math.IsNaN(resp.Z[3][0]) || !close(resp.Z[3][2], 0.20/4) {
		t.Errorf("response %v", resp.Z)
	}
	corr := plots["correlation"].Figure.(*figure.Heat)
	rho := r.Correlation()
	if corr.Min != -1 || corr.Max != 1 || corr.Z[0][1] != rho[0][1] || !slices.Equal(corr.XBounds, []float64{2}) {
		t.Errorf("correlation %v, bounds %v", corr.Z, corr.XBounds)
	}
}

// The report writes every plot as PNG (which decodes) and SVG.
func TestReportFiles(t *testing.T) {
	r, s := plotsResult(t)
	dir, files := writeFolder(t, t.TempDir(), "r", r, s)
	n := 0
	for _, p := range Plots(r, s) {
		data, err := os.ReadFile(filepath.Join(dir, PlotFile(p.Name, figure.PNG)))
		if err != nil {
			t.Fatal(err)
		}
		if _, err := png.DecodeConfig(bytes.NewReader(data)); err != nil {
			t.Errorf("%s: %v", p.Name, err)
		}
		if svg, err := os.ReadFile(filepath.Join(dir, PlotFile(p.Name, figure.SVG))); err != nil || !bytes.Contains(svg, []byte("<svg")) {
			t.Errorf("%s.svg: %v", p.Name, err)
		}
		n++
	}
	plotFiles := 0
	for _, f := range files {
		if strings.HasPrefix(f, PlotsFolder+"/") {
			plotFiles++
		}
	}
	if plotFiles != 2*n {
		t.Errorf("%d plot files for %d plots", plotFiles, n)
	}
}
