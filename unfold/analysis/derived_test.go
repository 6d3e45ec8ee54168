package analysis

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/derive"
)

// TestDerivedDecode checks that output.derived decodes into derived
// quantities of the truth binning (here one region "all" with the axis
// x), and that every bad value is refused at its file and line.
func TestDerivedDecode(t *testing.T) {
	const lumi = "  luminosity: 2.5"
	src := strings.Replace(goodText(t), lumi, lumi+`
  derived:
    - {name: xs, region: all, kind: density, divide_by_widths: [x], luminosity: true}
    - name: shape
      region: all
      kind: shape
      axes: [x]`, 1)
	a, err := Decode([]byte(src), "testdata/derived.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Output.Derived) != 2 {
		t.Fatalf("%d derived quantities; want 2", len(a.Output.Derived))
	}
	d, s := a.Output.Derived[0], a.Output.Derived[1]
	// x has the bins [0,1), [1,2), [2,3): the density divides each by
	// its width 1 and by the luminosity 2.5.
	if sp := d.Spec(); sp.Kind != derive.Density || !sp.Luminosity || d.Len() != 3 || d.Divisor(0) != 2.5 {
		t.Errorf("density %+v, %d bins, divisor %g", sp, d.Len(), d.Divisor(0))
	}
	if sp := s.Spec(); sp.Kind != derive.Shape || s.Groups() != 1 {
		t.Errorf("shape %+v", sp)
	}

	add := func(entry string) string { return lumi + "\n  derived:\n    - " + entry }
	cases := []struct{ new, want string }{
		{add("{region: all, kind: shape}"), `testdata/bad.yaml:34: output.derived[0].name: missing`},
		{add("{name: a, region: all}"), `testdata/bad.yaml:34: output.derived[0].kind: missing: give the kind (projection, density, shape)`},
		{add("{name: a, region: all, kind: slice}"), `testdata/bad.yaml:34: output.derived[0].kind: unknown kind "slice" (known: projection, density, shape)`},
		{add("{name: a, region: central, kind: shape}"), `testdata/bad.yaml:34: output.derived[0].region: no truth region "central" (the regions: all)`},
		{add("{name: a, region: all, kind: shape, axes: [y]}"), `testdata/bad.yaml:34: output.derived[0].axes: region "all" has no axis "y"`},
		{add("{name: a, region: all, kind: density}"), `testdata/bad.yaml:34: output.derived[0].divide_by_widths: a density needs the kept axes whose widths divide`},
		{add("{name: a, region: all, kind: projection, divide_by_widths: [x]}"), `testdata/bad.yaml:34: output.derived[0].divide_by_widths: a projection divides by no width`},
		{add("{name: a, region: all, kind: shape, luminosity: true}"), `testdata/bad.yaml:34: output.derived[0].luminosity: a normalised shape does not depend on the luminosity`},
		{add("{name: a, region: all, kind: shape, per_slice: [x]}"), `testdata/bad.yaml:34: output.derived[0].per_slice: slicing along every kept axis`},
		{add("{name: a/b, region: all, kind: shape}"), `testdata/bad.yaml:34: output.derived[0].name: "a/b" is not a name`},
		{add("{name: a, region: all, kind: shape}\n    - {name: a, region: all, kind: projection}"), `testdata/bad.yaml:35: output.derived[1].name: "a" is the name of the derived quantity on line 34 too`},
		{add("{name: a, region: all, kind: shape, colour: red}"), `testdata/bad.yaml:34: colour: unknown key in a derived quantity (known keys: name, region, kind, axes, per_slice, divide_by_widths, luminosity)`},
		{add("{name: a, region: all, kind: shape, luminosity: 2}"), `testdata/bad.yaml:34: output.derived[0].luminosity: value 2 is an integer, want`},
		{lumi + "\n  root_slice_axis: z", `testdata/bad.yaml:33: output.root_slice_axis: the truth binning has no axis "z" (its axes: x)`},
		{lumi + "\n  root_slice_axis: [x]", `testdata/bad.yaml:33: output.root_slice_axis: the value is a list, want a string`},
		{lumi + "\n  derived: {name: a}", `testdata/bad.yaml:33: output.derived: the value is a mapping, want a list of derived quantities`},
		{lumi + "\n  formats: [json, csv]\n  derived:\n    - {name: a, region: all, kind: shape}", `testdata/bad.yaml:33: output.formats: output.derived lists quantities but the formats leave out "derived"`},
	}
	for _, c := range cases {
		err := decodeErr(t, lumi, c.new)
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q:\n got %v\nwant %s", c.new, err, c.want)
		}
	}
	// Without a luminosity, asking to divide by it is refused.
	err = decodeErr(t, lumi, "  derived:\n    - {name: a, region: all, kind: projection, luminosity: true}")
	if want := `testdata/bad.yaml:33: output.derived[0].luminosity: no integrated luminosity is given: set output.luminosity`; !strings.Contains(err.Error(), want) {
		t.Errorf("got %v\nwant %s", err, want)
	}
}

// TestRunDerived runs a job with derived quantities and checks the
// tables and result.json against the estimate and its covariance: the
// density is the estimate of each in-range bin divided by its width and
// the luminosity, with the uncertainty divided alike; the shape sums to
// one and is marked singular (method.md §22 Derived quantities). With
// the variances only (exact per-bin variances on this small problem),
// every source propagates its own derived covariance, which equals
// D Cov Dᵀ of the full mode to rounding (method.md §22).
func TestRunDerived(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(20000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(4000, 6)[1]})
	const derived = `  luminosity: 2
  derived:
    - {name: xs, region: all, kind: density, divide_by_widths: [x], luminosity: true}
    - {name: shape, region: all, kind: shape}
`
	fullUnc := map[string][]float64{}
	for _, cov := range []string{"full", "diag"} {
		src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "  luminosity: 2\n", derived,
			"covariance: full", "covariance: "+cov, "folder: result", "folder: result-"+cov).Replace(analysisTemplate)
		p := filepath.Join(dir, "analysis-"+cov+".yaml")
		if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
			t.Fatal(err)
		}
		a, err := Load(p)
		if err != nil {
			t.Fatal(err)
		}
		out, err := a.Run(context.Background(), nil, false)
		if err != nil {
			t.Fatal(err)
		}
		var doc struct {
			Estimate   []float64   `json:"estimate"`
			Covariance [][]float64 `json:"covariance"`
			Derived    []struct {
				Name, Kind, File, Note string
				CovarianceFile         string    `json:"covariance_file"`
				Value                  []float64 `json:"value"`
				Unc                    []float64 `json:"uncertainty"`
				Singular               bool      `json:"singular_covariance"`
			} `json:"derived"`
		}
		raw, err := os.ReadFile(filepath.Join(out.Folder, "result.json"))
		if err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(raw, &doc); err != nil {
			t.Fatal(err)
		}
		if len(doc.Derived) != 2 {
			t.Fatalf("%s: %d derived entries", cov, len(doc.Derived))
		}
		xs, sh := doc.Derived[0], doc.Derived[1]
		widths := []float64{0.5, 0.5, 0.5, 0.5, 1}
		sum := 0.0
		for j, w := range widths {
			want := doc.Estimate[j] / w / 2
			if math.Abs(xs.Value[j]-want) > 1e-12*want {
				t.Errorf("%s: density bin %d: %v; want %v", cov, j, xs.Value[j], want)
			}
			sum += sh.Value[j]
			if cov == "full" {
				u := math.Sqrt(doc.Covariance[j][j]) / w / 2
				if math.Abs(xs.Unc[j]-u) > 1e-12*u {
					t.Errorf("density uncertainty %d: %v; want %v", j, xs.Unc[j], u)
				}
			}
		}
		for _, d := range doc.Derived {
			if cov == "full" {
				fullUnc[d.Name] = d.Unc
				continue
			}
			// The exact data source propagated without the full
			// covariance: D J diag(v) Jᵀ Dᵀ = D Cov Dᵀ (method.md §22).
			for j, u := range fullUnc[d.Name] {
				if math.Abs(d.Unc[j]-u) > 1e-10*u {
					t.Errorf("diag: %s uncertainty %d: %v; full mode %v", d.Name, j, d.Unc[j], u)
				}
			}
		}
		if math.Abs(sum-1) > 1e-12 || !sh.Singular || sh.Kind != "shape" {
			t.Errorf("%s: shape sums to %v, singular %v", cov, sum, sh.Singular)
		}
		table, err := os.ReadFile(filepath.Join(out.Folder, "derived-xs.csv"))
		if err != nil {
			t.Fatal(err)
		}
		lines := strings.Split(strings.TrimSpace(string(table)), "\n")
		header := "index,x_low,x_high,value,uncertainty"
		if lines[0] != header || len(lines) != 6 || !strings.HasPrefix(lines[5], "4,2,3,") {
			t.Errorf("%s: derived-xs.csv:\n%s", cov, table)
		}
		_, err = os.Stat(filepath.Join(out.Folder, "derived-shape-covariance.csv"))
		switch cov {
		case "full":
			if err != nil || sh.CovarianceFile != "derived-shape-covariance.csv" || !strings.Contains(sh.Note, "singular") {
				t.Errorf("full: covariance file %q (%v), note %q", sh.CovarianceFile, err, sh.Note)
			}
		case "diag":
			if err != nil || xs.Unc == nil || !strings.Contains(xs.Note, "source by source") || !strings.Contains(sh.Note, "singular") {
				t.Errorf("diag: covariance file present or uncertainty %v, note %q", xs.Unc, xs.Note)
			}
		}
	}
}

// TestRunDerivedReplicas checks that bootstrap replicas propagate their
// own derived covariance under per-bin variances: the same replicas
// (the same seed) give D Cov Dᵀ of the full mode, with the exact data
// source, to rounding (method.md §22 Derived quantities, §25 Bootstrap
// replicas of the simulated events, §18 on the sources adding).
func TestRunDerivedReplicas(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(20000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(4000, 6)[1]})
	const derived = `  luminosity: 2
  derived:
    - {name: xs, region: all, kind: density, divide_by_widths: [x], luminosity: true}
    - {name: shape, region: all, kind: shape}
`
	unc := map[string][][]float64{}
	for _, cov := range []string{"full", "diag"} {
		src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "  luminosity: 2\n", derived,
			"covariance: full\n", "covariance: "+cov+"\n  replicas: 20\n  seed: 3\n", "folder: result", "folder: result-"+cov).Replace(analysisTemplate)
		p := filepath.Join(dir, "analysis-"+cov+".yaml")
		if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
			t.Fatal(err)
		}
		a, err := Load(p)
		if err != nil {
			t.Fatal(err)
		}
		out, err := a.Run(context.Background(), nil, false)
		if err != nil {
			t.Fatal(err)
		}
		if out.Result.Source("simulation") == nil || (cov == "diag") != (out.Result.Covariance == nil) {
			t.Fatalf("%s: no replicas' source, or the covariance %v", cov, out.Result.Covariance != nil)
		}
		var doc struct {
			Derived []struct {
				Name, Note string
				Unc        []float64 `json:"uncertainty"`
			} `json:"derived"`
		}
		raw, err := os.ReadFile(filepath.Join(out.Folder, "result.json"))
		if err != nil {
			t.Fatal(err)
		}
		if err := json.Unmarshal(raw, &doc); err != nil {
			t.Fatal(err)
		}
		for i, d := range doc.Derived {
			if d.Unc == nil {
				t.Fatalf("%s: %s has no uncertainty: %s", cov, d.Name, d.Note)
			}
			unc[cov] = append(unc[cov], d.Unc)
			if cov == "diag" && !strings.Contains(d.Note, "simulation: from the same 20") {
				t.Errorf("diag: note %q", d.Note)
			}
			if cov == "diag" {
				for j, u := range unc["full"][i] {
					if math.Abs(d.Unc[j]-u) > 1e-9*u {
						t.Errorf("diag: %s uncertainty %d: %v; full mode %v", d.Name, j, d.Unc[j], u)
					}
				}
			}
		}
	}
}

// TestRunDerivedTooLarge checks that derived quantities whose dense
// covariances do not fit under the memory limit are refused at
// output.derived with their size, the largest named, before the
// unfolding.
func TestRunDerivedTooLarge(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(2000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(400, 6)[1]})
	// 5 bins: 4 matrices of 5 × 5 × 8 bytes = 800 bytes each, above
	// a limit of 5e-7 GiB (536 bytes).
	const derived = `  luminosity: 2
  derived:
    - {name: big-shape, region: all, kind: shape}
`
	src := strings.NewReplacer("SIM", "sim.csv", "DATA", "data.csv", "  luminosity: 2\n", derived,
		"  iterations: 4\n", "  iterations: 4\n  memory_limit_gib: 5e-7\n", "covariance: full", "covariance: diag").Replace(analysisTemplate)
	p := filepath.Join(dir, "analysis.yaml")
	if err := os.WriteFile(p, []byte(src), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := Load(p)
	if err != nil {
		t.Fatal(err)
	}
	_, err = a.Run(context.Background(), nil, false)
	if err == nil || !strings.Contains(err.Error(), "analysis.yaml:") || !strings.Contains(err.Error(), "output.derived") ||
		!strings.Contains(err.Error(), `"big-shape"`) || !strings.Contains(err.Error(), "800 B") {
		t.Fatalf("got %v", err)
	}
}
