package analysis

import (
	"context"
	"os"
	"path/filepath"
	"testing"

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
