package analysis

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
	"github.com/desmear/desmear/unfold/result"
)

// variationAnalysis writes a simulation (twice, under two names), data
// and a background sample with the scale uncertainty u, and an analysis
// file of the template with the variations text; it returns the decoded
// analysis.
func variationAnalysis(t *testing.T, u float64, variations string) *Analysis {
	t.Helper()
	dir := t.TempDir()
	sim := simEvents(8000, 12)
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, sim)
	writeSample(t, filepath.Join(dir, "sim2.csv"), simColumns, sim)
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(3000, 13)[1]})
	rng := rand.New(rand.NewPCG(1, 1))
	bx, bw := make([]float64, 400), make([]float64, 400)
	for k := range bx {
		bx[k], bw[k] = 3*rng.Float64(), 2
	}
	writeSample(t, filepath.Join(dir, "bkg.csv"), []string{"xb", "wb"}, [][]float64{bx, bw})
	bkg := "backgrounds:\n  - {name: flat, events: bkg.csv, weight: wb, observables: {x: xb}, scale: 0.5, scale_uncertainty: " + fmtFloat(u) + "}\nunfolding:"
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "unfolding:", bkg, "output:", variations+"output:").Replace(analysisTemplate)
	src = strings.NewReplacer("    tree: events\n", "", "  tree: events\n", "").Replace(src)
	path := filepath.Join(dir, "analysis.yaml")
	if err := os.WriteFile(path, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	return a
}

func fmtFloat(x float64) string { b, _ := json.Marshal(x); return string(b) }

// A reweighting by exactly 1 and the same simulation under another file
// name give the nominal estimate bit for bit, so their shifts are zero
// exactly (method.md §21 Systematic variations: δ = μ' − μ); a real
// reweighting gives a shift; and the total is the sum of the sources
// (method.md §18 Sources of uncertainty and their total).
func TestVariationOfOneZeroShift(t *testing.T) {
	a := variationAnalysis(t, 0.05, `variations:
  - name: one
    weight: "1"
  - name: same-sample
    files: [sim2.csv]
  - name: one-pair
    up: {weight: "1"}
    down: {weight: "1*1"}
  - name: tilt
    weight: "1 + 0.3*x_true"
  - name: energy-scale
    up: {reco_observables: {x: "1.03*x_reco"}}
    down: {reco_observables: {x: "0.97*x_reco"}}
`)
	ctx := context.Background()
	out, err := a.Run(ctx, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	res := out.Result
	s, m, _ := a.Settings()
	fixed := fixRegularisation(m, res)
	for _, name := range []string{"one", "same-sample"} {
		v := &a.Variations[map[string]int{"one": 0, "same-sample": 1}[name]]
		est, err := a.varied(ctx, out, out.backgrounds, s, fixed, v, v.Change, nil)
		if err != nil {
			t.Fatal(err)
		}
		for j := range est {
			if math.Float64bits(est[j]) != math.Float64bits(res.Estimate[j]) {
				t.Errorf("%s: truth bin %d: varied estimate %v, nominal %v (not the same bits)", name, j, est[j], res.Estimate[j])
			}
		}
	}
	for _, name := range []string{"one", "same-sample", "one-pair"} {
		src := res.Source(name)
		if src == nil {
			t.Fatalf("no source %q", name)
		}
		for j, d := range src.Shift {
			if d != 0 || src.Variance[j] != 0 {
				t.Errorf("%s: truth bin %d: shift %v, variance %v, want 0 exactly", name, j, d, src.Variance[j])
			}
		}
	}
	for _, name := range []string{"tilt", "energy-scale", "flat-scale"} {
		src := res.Source(name)
		if src == nil {
			t.Fatalf("no source %q", name)
		}
		moved := false
		for _, d := range src.Shift {
			moved = moved || math.Abs(d) > 1e-6
		}
		if !moved {
			t.Errorf("%s: no shift at all: %v", name, src.Shift)
		}
	}
	if src := res.Source("energy-scale"); src.Method != unfold.MethodHalfDifference || src.Up == nil {
		t.Errorf("energy-scale source %+v", src)
	}
	// The document: every source, and the total uncertainty the root of
	// the sum of their variances, the total covariance their sum
	// (method.md §18).
	var doc result.Result
	b, err := os.ReadFile(filepath.Join(out.Folder, "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if len(doc.Sources) != 7 || doc.Sources[0].Name != unfold.SourceData || doc.Sources[6].Name != "flat-scale" {
		t.Fatalf("sources %d: %v", len(doc.Sources), doc.Sources)
	}
	for j := range doc.Estimate {
		v := 0.0
		for _, src := range doc.Sources {
			v += src.Uncertainty[j] * src.Uncertainty[j]
		}
		if math.Abs(doc.Uncertainty[j]-math.Sqrt(v)) > 1e-9*math.Sqrt(v) {
			t.Errorf("truth bin %d: total %v, root of the summed variances %v", j, doc.Uncertainty[j], math.Sqrt(v))
		}
		for k := range doc.Estimate {
			c := 0.0
			for _, src := range doc.Sources {
				c += src.Covariance[j][k]
			}
			if math.Abs(doc.Covariance[j][k]-c) > 1e-9*(math.Abs(c)+1) {
				t.Errorf("cov[%d][%d]: total %v, sum %v", j, k, doc.Covariance[j][k], c)
			}
		}
		if tl := doc.Sources[4]; j < len(tl.Shift) && tl.Covariance[j][j] != tl.Shift[j]*tl.Shift[j] {
			t.Errorf("tilt: variance %v, shift² %v", tl.Covariance[j][j], tl.Shift[j]*tl.Shift[j])
		}
	}
}

// The shift of a background's scale uncertainty u is the result with the
// background scaled by 1 + u minus the nominal one (method.md §21
// Systematic variations); to first order it is the derivative of the
// estimate with respect to the background times u·b. Checked against
// the exact Jacobian of method.md §8 Linearised uncertainty propagation
// and against a central finite difference of the unfolding with respect
// to the scale (step 1e-4): both agree with the shift to O(u²), here
// within 2·u of the largest first-order shift.
func TestBackgroundScaleShiftLinearised(t *testing.T) {
	const u = 0.01
	a := variationAnalysis(t, u, "")
	ctx := context.Background()
	out, err := a.Run(ctx, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	res, p := out.Result, out.Problem
	src := res.Source("flat-scale")
	if src == nil || src.Method != unfold.MethodShift {
		t.Fatalf("source %+v", src)
	}
	_, m, _ := a.Settings()
	fixed := fixRegularisation(m, res)
	prep, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	fit, err := fixed.Fit(ctx, prep)
	if err != nil {
		t.Fatal(err)
	}
	jc := unfold.NewJacobian(prep)
	if err := fit.Jacobian(ctx, jc); err != nil {
		t.Fatal(err)
	}
	nr, part := a.Reco.Len(), out.backgrounds[0].Values
	if jc.Cols != 2*nr {
		t.Fatalf("Jacobian of %d columns, want data and background (%d)", jc.Cols, 2*nr)
	}
	// The central finite difference: the problem with the background
	// sample scaled by 1 ± h, unfolded here.
	const h = 1e-4
	unfoldScaled := func(f float64) []float64 {
		q := *p
		q.Background = make([]float64, nr)
		for i := range q.Background {
			q.Background[i] = p.Background[i] + (f-1)*part[i]
		}
		r, err := unfold.Unfold(ctx, &q, &unfold.Settings{}, fixed)
		if err != nil {
			t.Fatal(err)
		}
		return r.Estimate
	}
	plus, minus := unfoldScaled(1+h), unfoldScaled(1-h)
	lin, fd := make([]float64, len(res.Estimate)), make([]float64, len(res.Estimate))
	scale := 0.0
	for j := range lin {
		for i := range nr {
			lin[j] += jc.At(j, nr+i) * u * part[i]
		}
		fd[j] = (plus[j] - minus[j]) / (2 * h) * u
		scale = max(scale, math.Abs(lin[j]))
	}
	if scale == 0 {
		t.Fatal("the background does not move the estimate")
	}
	for j := range lin {
		if !res.Determined[j] {
			continue
		}
		if d := math.Abs(src.Shift[j] - lin[j]); d > 2*u*scale {
			t.Errorf("truth bin %d: shift %v, Jacobian × u·b %v (difference %v, above 2u × %v)", j, src.Shift[j], lin[j], d, scale)
		}
		if d := math.Abs(src.Shift[j] - fd[j]); d > 2*u*scale {
			t.Errorf("truth bin %d: shift %v, finite difference %v (difference %v)", j, src.Shift[j], fd[j], d)
		}
		// The derivative itself: the Jacobian against the finite
		// difference, to the step's O(h²) and rounding.
		if d := math.Abs(lin[j] - fd[j]); d > 1e-5*scale {
			t.Errorf("truth bin %d: Jacobian × u·b %v, finite difference %v", j, lin[j], fd[j])
		}
	}
	// The scale uncertainty no longer enters the background variance.
	for i, v := range p.BackgroundVariance {
		if want := out.Response.FakesSumW2[i] + out.backgrounds[0].Variance[i]; math.Abs(v-want) > 1e-12*(want+1) {
			t.Errorf("reco bin %d: background variance %v, want Σw² %v", i, v, want)
		}
	}
}

// With the Tikhonov method a variation is unfolded at the nominal
// result's tau (method.md §21 Systematic variations): a reweighting by
// exactly 1 then moves no bin by more than rounding (a solve at the
// fixed tau against the scan's choice).
func TestVariationTikhonovFixedTau(t *testing.T) {
	a := variationAnalysis(t, 0.05, "variations:\n  - {name: one, weight: \"1\"}\n")
	a.Unfolding.Method, a.Unfolding.Iterations, a.Unfolding.TauCriterion = "tikhonov", 0, "correlation"
	out, err := a.Run(context.Background(), nil, false)
	if err != nil {
		t.Fatal(err)
	}
	res := out.Result
	_, m, _ := a.Settings()
	fixed := fixRegularisation(m, res)
	ts, ok := fixed.(*tikhonov.Settings)
	d, dok := res.Details.(*tikhonov.Details)
	if !ok || !dok || ts.Tau != d.Tau || !(ts.Tau > 0) || ts.Criterion != tikhonov.LCurve || d.Criterion != "correlation" {
		t.Fatalf("fixed method %+v, details %+v", fixed, res.Details)
	}
	src := res.Source("one")
	for j, d := range src.Shift {
		if math.Abs(d) > 1e-9*(math.Abs(res.Estimate[j])+1) {
			t.Errorf("truth bin %d: shift %v of %v", j, d, res.Estimate[j])
		}
	}
}

// Dense source covariances that would not fit under the memory limit are
// refused with the size (unfold.TooLargeError), before the unfolding;
// the nominal covariance alone would fit.
func TestVariationCovariancesTooLarge(t *testing.T) {
	var v strings.Builder
	v.WriteString("variations:\n")
	for k := range 12 {
		fmt.Fprintf(&v, "  - {name: norm%d, background_scale: 1.1}\n", k)
	}
	a := variationAnalysis(t, 0, v.String())
	nt := int64(a.Truth.Len())
	// Room for the nominal Jacobian and covariance (16·nt·2nr + 8·nt²),
	// not for 13 more nt × nt matrices.
	a.Unfolding.MemoryLimit = 16*nt*2*int64(a.Reco.Len()) + 8*nt*nt
	_, err := a.Run(context.Background(), nil, false)
	var tl *unfold.TooLargeError
	if !errors.As(err, &tl) || tl.Bytes != 8*nt*nt*13 || !strings.Contains(err.Error(), "12 systematic sources") {
		t.Fatalf("got %v", err)
	}
}

// A missing file of an alternative simulation is reported at its key
// before any event is read.
func TestVariationMissingFile(t *testing.T) {
	a := variationAnalysis(t, 0, "variations:\n  - {name: other, files: [nosuch.csv]}\n")
	_, err := a.Run(context.Background(), nil, false)
	if err == nil || !strings.Contains(err.Error(), "variations[0].files[0]") || strings.Contains(err.Error(), "files[0].file") {
		t.Fatalf("got %v", err)
	}
}
