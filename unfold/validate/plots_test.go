package validate

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// The figure of the scan draws the report's numbers: the criterion's
// curve with its precision, Σ bias² and Σ variance, whose sum with the
// variance's 1/T → 1/(T−1) factor is the mean squared error (the
// bias-variance decomposition, common practice), the mean |bias|/σ and
// the coverage; the recommendation is marked in every panel. The folder
// holds the figure as PNG and SVG.
func TestScanFigure(t *testing.T) {
	p, _ := band(t, 10)
	for i := range p.Data {
		p.Data[i] = math.Round(p.Data[i] * 0.02)
	}
	r, err := Validate(context.Background(), p, nil, &Options{Method: iterations, Nominal: iterations(3), MaxK: 5, Toys: 40, Seed: 5})
	if err != nil {
		t.Fatal(err)
	}
	fig := r.ScanFigure()
	if len(fig.Panels) != 4 {
		t.Fatalf("%d panels", len(fig.Panels))
	}
	T := float64(r.Toys)
	for _, pn := range fig.Panels {
		if len(pn.VLines) != 1 || pn.VLines[0] != float64(r.Recommended) {
			t.Errorf("panel %q marks %v, recommended %d", pn.YLabel, pn.VLines, r.Recommended)
		}
	}
	crit := fig.Panels[0].Points[0]
	parts := fig.Panels[1].Lines
	for i, pt := range r.Scan {
		if crit.X[i] != float64(pt.K) || crit.Y[i] != pt.MSE || crit.YErr[i] != pt.MSEError {
			t.Errorf("k=%d: criterion point %v ± %v, MSE %v ± %v", pt.K, crit.Y[i], crit.YErr[i], pt.MSE, pt.MSEError)
		}
		if got := parts[0].Y[i] + parts[1].Y[i]*(T-1)/T; math.Abs(got-pt.MSE) > 1e-9*pt.MSE {
			t.Errorf("k=%d: Σ bias² + Σ variance·(T−1)/T = %v, MSE %v", pt.K, got, pt.MSE)
		}
		if fig.Panels[2].Points[0].Y[i] != pt.BiasOverSigma || fig.Panels[3].Lines[0].Y[i] != pt.CoverageMean || fig.Panels[3].Lines[1].Y[i] != pt.CoverageMin {
			t.Errorf("k=%d: bias and coverage panels", pt.K)
		}
	}
	dir := filepath.Join(t.TempDir(), "v")
	if err := WriteFolder(dir, false, Program{Name: "test"}, r); err != nil {
		t.Fatal(err)
	}
	for _, f := range Files() {
		if st, err := os.Stat(filepath.Join(dir, f)); err != nil || st.Size() == 0 {
			t.Errorf("%s: %v", f, err)
		}
	}
}
