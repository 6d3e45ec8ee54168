package result

import (
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"go-hep.org/x/hep/groot/riofs"
	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/derive"
	"github.com/desmear/desmear/unfold/internal/rootio"
)

// TestROOTFileReadBack writes result.root through a result folder with
// the slices along the first axis of a 2-D region with flows on both
// axes, the covariance, and derived quantities, and reads every
// histogram back with go-hep, cell by cell, flows included. The expected
// cells come from the reverse lookup of each global bin (Scheme.Bin: its
// per-axis bins, or the flow it is in) placed in ROOT's cell layout
// (cell 0 the underflow, 1..n the bins, n+1 the overflow; common
// practice), an independent path from the writer's (Scheme.Global).
func TestROOTFileReadBack(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: x, edges: [0, 1, 3, 6], overflow: true}
      - {name: y, edges: [0, 0.5, 1, 2], underflow: true, overflow: true}
  - name: f
    axes:
      - {name: x, edges: [6, 8, 10], underflow: true}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len()
	r := &Result{Estimate: make([]float64, n), Uncertainty: make([]float64, n), SliceAxis: "x"}
	cov := mat.NewSymDense(n, nil)
	for g := range n {
		r.Estimate[g] = float64(100 + 7*g)
		for h := g; h < n; h++ {
			v := 1.0 / float64(1+h-g)
			if h == g {
				v = float64(2 + g)
			}
			cov.SetSym(g, h, v)
		}
		r.Uncertainty[g] = sqrtPos(cov.At(g, g))
	}
	r.Covariance = make([][]float64, n)
	for g := range n {
		r.Covariance[g] = make([]float64, n)
		for h := range n {
			r.Covariance[g][h] = cov.At(g, h)
		}
	}
	for _, sp := range []derive.Spec{
		{Name: "px", Region: "c", Axes: []string{"x"}},
		{Name: "dxy", Region: "c", Kind: derive.Density, DivideByWidths: []string{"x"}},
	} {
		q, err := derive.New(s, sp, 0)
		if err != nil {
			t.Fatal(err)
		}
		r.Derived = append(r.Derived, NewDerived(q, r.Estimate, cov))
	}

	dir := filepath.Join(t.TempDir(), "res")
	f, err := New(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if _, err := writeROOT(f, r, s); err != nil {
		t.Fatal(err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(dir, RootFile)

	// The file records its final name, not the temporary one.
	rf, err := riofs.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	if rf.Name() != RootFile {
		t.Errorf("the file records the name %q", rf.Name())
	}
	rf.Close()

	read1 := func(key string) *rootio.Hist1D {
		h, err := rootio.ReadHist1D(path, key)
		if err != nil {
			t.Fatal(err)
		}
		return h
	}
	read2 := func(key string) *rootio.Hist2D {
		h, err := rootio.ReadHist2D(path, key)
		if err != nil {
			t.Fatal(err)
		}
		return h
	}
	// Expected cells of the slices along x: one TH1D per in-range y bin
	// of c; f, without y... has x as its only axis.
	want := map[string][]float64{}
	wantVar := map[string][]float64{}
	cell := func(i, nbins int) int {
		switch i {
		case binning.UnderflowBin:
			return 0
		case binning.OverflowBin:
			return nbins + 1
		}
		return i + 1
	}
	for g := range n {
		b := s.Bin(g)
		var key string
		var c, nb int
		if b.RegionName == "c" {
			j := b.Index[1]
			if j < 0 {
				continue // a y flow: in no slice along x
			}
			key, c, nb = fmt.Sprintf("c/counts_y%d", j), cell(b.Index[0], 3), 3
		} else {
			key, c, nb = "f/counts", cell(b.Index[0], 2), 2
		}
		if want[key] == nil {
			want[key], wantVar[key] = make([]float64, nb+2), make([]float64, nb+2)
		}
		want[key][c], wantVar[key][c] = r.Estimate[g], r.Uncertainty[g]*r.Uncertainty[g]
	}
	if len(want) != 4 {
		t.Fatalf("%d expected slices", len(want))
	}
	for key, w := range want {
		h := read1(key)
		if len(h.SumW) != len(w) {
			t.Fatalf("%s: %d cells; want %d", key, len(h.SumW), len(w))
		}
		for c := range w {
			if h.SumW[c] != w[c] || h.SumW2[c] != wantVar[key][c] {
				t.Errorf("%s cell %d: %v ±² %v; want %v ±² %v", key, c, h.SumW[c], h.SumW2[c], w[c], wantVar[key][c])
			}
		}
	}
	// The covariance and correlation of each region: in-range bins,
	// then flow bins, in global order, at cells (ix+1, iy+1).
	for k, name := range []string{"c", "f"} {
		var in, fl []int
		for g := range n {
			if b := s.Bin(g); b.Region == k {
				if b.Flow {
					fl = append(fl, g)
				} else {
					in = append(in, g)
				}
			}
		}
		bins := append(in, fl...)
		hc, hr := read2(name+"/covariance"), read2(name+"/correlation")
		nx := len(bins) + 2
		if len(hc.SumW) != nx*nx {
			t.Fatalf("%s/covariance: %d cells for %d bins", name, len(hc.SumW), len(bins))
		}
		for c := range hc.SumW {
			ix, iy := c%nx, c/nx
			w, rho := 0.0, 0.0
			if ix >= 1 && ix <= len(bins) && iy >= 1 && iy <= len(bins) {
				gx, gy := bins[ix-1], bins[iy-1]
				w = cov.At(gx, gy)
				rho = w / sqrtPos(cov.At(gx, gx)*cov.At(gy, gy))
			}
			if hc.SumW[c] != w {
				t.Errorf("%s/covariance (%d,%d): %v; want %v", name, ix, iy, hc.SumW[c], w)
			}
			if d := hr.SumW[c] - rho; d > 1e-15 || d < -1e-15 {
				t.Errorf("%s/correlation (%d,%d): %v; want %v", name, ix, iy, hr.SumW[c], rho)
			}
		}
	}
	// The projection onto x: hand sums over the in-range y bins (flows
	// left out), and 0 in the flow cells.
	px := read1("derived/px")
	for c := range px.SumW {
		w := 0.0
		if c >= 1 && c <= 3 {
			for j := range 3 {
				w += r.Estimate[s.Global(0, c-1, j)]
			}
		}
		if px.SumW[c] != w {
			t.Errorf("derived/px cell %d: %v; want %v", c, px.SumW[c], w)
		}
		if u := r.Derived[0].Uncertainty; c >= 1 && c <= 3 && px.SumW2[c] != u[c-1]*u[c-1] {
			t.Errorf("derived/px cell %d: squared weight %v; want %v", c, px.SumW2[c], u[c-1]*u[c-1])
		}
	}
	// The 2-D density divided by the x widths only.
	d2 := read2("derived/dxy")
	wx := []float64{1, 2, 3}
	for c := range d2.SumW {
		ix, iy := c%5, c/5
		w := 0.0
		if ix >= 1 && ix <= 3 && iy >= 1 && iy <= 3 {
			w = r.Estimate[s.Global(0, ix-1, iy-1)] / wx[ix-1]
		}
		if d := d2.SumW[c] - w; d > 1e-12*w || d < -1e-12*w {
			t.Errorf("derived/dxy (%d,%d): %v; want %v", ix, iy, d2.SumW[c], w)
		}
	}
	// Slicing along an axis whose successor has edges by its bin is
	// refused.
	s2, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: y, edges: [0, 1, 2]}
      - {name: pt, edges_by_bin: [[0, 5, 20], [0, 20]]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if _, err := SlicesAlong(s2, "y"); err == nil || !strings.Contains(err.Error(), `cannot be sliced along "y"`) {
		t.Errorf("slicing along y: %v", err)
	}
	if _, err := SlicesAlong(s2, "eta"); err == nil {
		t.Error("slicing along an unknown axis accepted")
	}
}
