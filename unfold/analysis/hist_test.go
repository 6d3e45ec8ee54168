package analysis

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/response"

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
	// Their content, by hand: x flows Σ_iy (100·iy+1) + (100·iy+4) =
	// 2025, y underflow 2 + 3; of all 20 cells, 4050.
	if m.OutsideContent != 2030 || m.OutsideFraction != 2030.0/4050 {
		t.Errorf("outside content %v (fraction %v), want 2030 (2030/4050)", m.OutsideContent, m.OutsideFraction)
	}

	// Edges that differ from the scheme are an error.
	h.XEdges = []float64{0, 1, 3}
	rootio.WriteFile(filepath.Join(dir, "data.root"), nil, []*rootio.Hist2D{h})
	if _, err := a.FillData(context.Background(), nil); err == nil {
		t.Error("a histogram with other edges was accepted")
	}
}

// Efficiencies and purities above 1 (negative event weights) are
// warned about, naming the truth bins; plausible ones are not (common
// practice: both are fractions of events, at most 1).
func TestResponseWarnings(t *testing.T) {
	truth, err := binning.Decode(strings.NewReader("regions: [{name: r, axes: [{name: x, edges: [0, 1, 2, 3]}]}]"), "truth.yaml")
	if err != nil {
		t.Fatal(err)
	}
	a := &Analysis{Truth: truth}
	m, err := sparse.NewMatrix(3, 3, []int{0, 1, 2, 3}, []int{0, 1, 2}, []float64{5, 9, 2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	r := &response.Built{Migrations: m, Generated: []float64{10, 6, 4}, Fakes: make([]float64, 3),
		Diagonal: []float64{5, 5, 2}, RecoInTruth: []float64{6, 9, 1.5}}
	w := a.ResponseWarnings(r)
	// Efficiency 9/6 = 1.5 in bin 1; purity 2/1.5 = 1.33 in bin 2.
	if len(w) != 2 || !strings.Contains(w[0], "efficiency is above 1 in truth bins 1 (r x[1,2)) 1.5") || !strings.Contains(w[1], "purity is above 1 in truth bins 2 (r x[2,3)) 1.33") {
		t.Errorf("warnings %q", w)
	}
	r.Generated[1], r.RecoInTruth[2] = 9, 2
	if w := a.ResponseWarnings(r); len(w) != 0 {
		t.Errorf("warnings for plausible values: %q", w)
	}
}
