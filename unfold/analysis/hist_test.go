package analysis

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"

	"github.com/desmear/desmear/unfold/internal/rootio"
)

// Data from a TH2D: every cell goes to the global bin of the same
// (x, y) cell, ROOT's flow cells to the scheme's flow bins where they are
// switched on; non-empty cells of switched-off flows are counted as
// outside. The cell layout is ROOT's (global cell ix + (nx+2)·iy; common
// practice, TH1::GetBin).
func TestDataFromTH2D(t *testing.T) {
	dir := t.TempDir()
	xe, ye := []float64{0, 1, 2}, []float64{10, 20, 30, 40}
	h := rootio.NewHist2D("hdata", xe, ye)
	for iy := 0; iy < 5; iy++ {
		for ix := 0; ix < 4; ix++ {
			c := h.Index(ix, iy)
			h.SumW[c] = float64(100*iy + ix + 1)
			h.SumW2[c] = 2 * h.SumW[c]
		}
	}
	if err := rootio.WriteFile(filepath.Join(dir, "data.root"), nil, []*rootio.Hist2D{h}); err != nil {
		t.Fatal(err)
	}
	src := `binning:
  truth:
    regions: [{name: r, axes: [{name: x, edges: [0, 2]}, {name: y, edges: [10, 40]}]}]
  reco:
    regions:
      - name: r
        axes:
          - {name: x, edges: [0, 1, 2]}
          - {name: y, edges: [10, 20, 30, 40], overflow: true}
observables:
  truth: {x: a, y: b}
  reco: {x: a, y: b}
response: saved
data:
  histogram: data.root
  name: hdata
output:
  folder: out
`
	p := filepath.Join(dir, "a.yaml")
	os.WriteFile(p, []byte(src), 0o644)
	a, err := Load(p)
	if err != nil {
		t.Fatal(err)
	}
	m, err := a.FillData(context.Background(), nil)
	if err != nil {
		t.Fatal(err)
	}
	// In-range bins, row-major (x outer, y inner); x bin i is ROOT's
	// ix = i+1 and y bin j its iy = j+1, holding 100·iy + ix + 1.
	want := []float64{102, 202, 302, 103, 203, 303}
	for g, w := range want {
		if m.Values[g] != w || m.Variance[g] != 2*w {
			t.Errorf("bin %d (%s): %v ± %v, want %v", g, a.Reco.Label(g), m.Values[g], m.Variance[g], w)
		}
	}
	// Flow bins: y overflow (iy = 4) for x bins 0 and 1.
	for k, w := range []float64{402, 403} {
		g := a.Reco.Global(0, k, -2)
		if m.Values[g] != w {
			t.Errorf("flow bin %d (%s): %v, want %v", g, a.Reco.Label(g), m.Values[g], w)
		}
	}
	// Switched-off flows: x under/overflow on every row (10 cells), y
	// underflow for x in range (2 cells).
	if m.Outside != 12 {
		t.Errorf("outside %d, want 12", m.Outside)
	}

	// Edges that differ from the scheme are an error.
	h.XEdges = []float64{0, 1, 3}
	rootio.WriteFile(filepath.Join(dir, "data.root"), nil, []*rootio.Hist2D{h})
	if _, err := a.FillData(context.Background(), nil); err == nil {
		t.Error("a histogram with other edges was accepted")
	}
}

// The result histograms of a 2-D rectangular region with a pt overflow:
// one TH1D per y bin with the overflow in ROOT's last cell, and a TH2D
// whose flow row holds the scheme's flow bins (ROOT cell layout, common
// practice); an edges-by-bin region gets slices only.
func TestResultHistograms(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: y, edges: [0, 1, 2]}
      - {name: pt, edges: [0, 10, 20], overflow: true}
  - name: f
    axes:
      - {name: y, edges: [2, 3, 4]}
      - {name: pt, edges_by_bin: [[0, 5, 20], [0, 20]]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	est := make([]float64, s.Len())
	unc := make([]float64, s.Len())
	for g := range est {
		est[g] = float64(10 * (g + 1))
		unc[g] = float64(g + 1)
	}
	h1, h2 := rootHistograms(s, est, unc, est, unc)
	names := map[string]*rootio.Hist1D{}
	for _, h := range h1 {
		names[h.Name] = h
	}
	for _, n := range []string{"c/counts_y0", "c/counts_y1", "c/density_y0", "f/counts_y0", "f/counts_y1"} {
		if names[n] == nil {
			t.Errorf("no histogram %s among %d", n, len(h1))
		}
	}
	if len(h2) != 2 || h2[0].Name != "c/counts2d" {
		t.Fatalf("TH2Ds %v", len(h2))
	}
	// c: in-range bins 0..3 (y0pt0, y0pt1, y1pt0, y1pt1); f: 4..6; flows
	// follow: (c y0 pt over) and (c y1 pt over).
	over0 := s.Global(0, 0, binning.OverflowBin)
	if h := names["c/counts_y0"]; h.SumW[1] != est[0] || h.SumW[2] != est[1] || h.SumW[3] != est[over0] || h.SumW2[3] != unc[over0]*unc[over0] {
		t.Errorf("c/counts_y0 %v", h.SumW)
	}
	if h := names["f/counts_y0"]; len(h.Edges) != 3 || h.SumW[1] != est[4] || h.SumW[2] != est[5] {
		t.Errorf("f/counts_y0 edges %v %v", h.Edges, h.SumW)
	}
	c := h2[0]
	if c.SumW[c.Index(1, 3)] != est[over0] || c.SumW[c.Index(2, 2)] != est[3] || c.SumW[c.Index(0, 1)] != 0 {
		t.Errorf("c/counts2d %v", c.SumW)
	}
	if d := h2[1]; d.SumW[d.Index(1, 3)] != 0 {
		t.Error("a density in a flow cell")
	}
}

// A 3-D region gets one TH1D per (outer, middle) bin pair along its last
// axis, with the last axis's flows in ROOT's flow cells.
func TestResultHistograms3D(t *testing.T) {
	s, err := binning.ReadFile("../../testdata/scheme3d.yaml")
	if err != nil {
		t.Fatal(err)
	}
	est := make([]float64, s.Len())
	for g := range est {
		est[g] = float64(g + 1)
	}
	h1, h2 := rootHistograms(s, est, nil, est, nil)
	names := map[string]*rootio.Hist1D{}
	for _, h := range h1 {
		names[h.Name] = h
	}
	// signal: y0 has 3 pt bins, y1 has 2: 5 slices; sideband (mass, y):
	// 2 slices; each of counts and density.
	if len(h1) != 14 || len(h2) != 2 {
		t.Fatalf("%d TH1D and %d TH2D, want 14 and 2", len(h1), len(h2))
	}
	h := names["signal/counts_y1_pt0"]
	if h == nil {
		t.Fatal("no signal/counts_y1_pt0")
	}
	under, over := s.Global(0, 1, 0, binning.UnderflowBin), s.Global(0, 1, 0, binning.OverflowBin)
	if h.SumW[0] != est[under] || h.SumW[3] != est[over] || h.SumW[1] != est[s.Global(0, 1, 0, 0)] || h.SumW[2] != est[s.Global(0, 1, 0, 1)] {
		t.Errorf("signal/counts_y1_pt0 = %v", h.SumW)
	}
	if h2[0].Name != "sideband/counts2d" {
		t.Errorf("TH2D %s", h2[0].Name)
	}
}
