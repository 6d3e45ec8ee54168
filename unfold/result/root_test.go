package result

import (
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

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

// The correlation TH2D of a region holds ρ between its bins, in-range
// bins first and flow bins after them, numbered from 0 (ROOT cell
// layout, common practice: cell (ix+1, iy+1) for bins ix, iy).
func TestCorrelationHistograms(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: pt, edges: [0, 10, 20], overflow: true}
  - name: f
    axes:
      - {name: pt, edges: [0, 5]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len() // c: 0, 1; f: 2; c overflow: 3
	rho := make([][]float64, n)
	for i := range rho {
		rho[i] = make([]float64, n)
		for j := range rho[i] {
			rho[i][j] = float64(10*i + j)
		}
	}
	h := correlationHistograms(s, rho)
	if len(h) != 2 || h[0].Name != "c/correlation" || h[1].Name != "f/correlation" {
		t.Fatalf("histograms %v", h)
	}
	c := h[0]
	if nx, ny := c.NBins(); nx != 3 || ny != 3 {
		t.Fatalf("c/correlation has %d×%d bins, want 3×3", nx, ny)
	}
	if c.SumW[c.Index(1, 1)] != rho[0][0] || c.SumW[c.Index(3, 1)] != rho[3][0] || c.SumW[c.Index(2, 3)] != rho[1][3] {
		t.Errorf("c/correlation cells %v", c.SumW)
	}
	if correlationHistograms(s, nil) != nil {
		t.Error("histograms without a covariance")
	}
}

// The response TH2D of a region holds R_ij = A_ij / G_j (method.md §2
// Response, efficiency, purity and stability) for the region's truth
// bins along x and every reco bin along y (ROOT cell layout: cell
// (ix+1, iy+1), common practice).
func TestResponseHistograms(t *testing.T) {
	r, s := plotsResult(t) // truth: c (bins 0, 1), f (bin 2); 4 reco bins
	h := responseHistograms(s, r)
	if len(h) != 2 || h[0].Name != "c/response" || h[1].Name != "f/response" {
		t.Fatalf("histograms %v", h)
	}
	c, f := h[0], h[1]
	if nx, ny := c.NBins(); nx != 2 || ny != 4 {
		t.Fatalf("c/response has %d×%d bins", nx, ny)
	}
	// A = R of problem D (diagnostics_test.go), G = (2, 1, 4).
	if c.SumW[c.Index(1, 2)] != 0.20/2 || c.SumW[c.Index(2, 4)] != 0.05/1 || f.SumW[f.Index(1, 4)] != 0.20/4 || f.SumW[f.Index(1, 1)] != 0 {
		t.Errorf("response cells c %v f %v", c.SumW, f.SumW)
	}
}
