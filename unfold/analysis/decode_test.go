package analysis

import (
	"errors"
	"fmt"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
	"github.com/desmear/desmear/unfold/result"
)

func TestLoadGood(t *testing.T) {
	a, err := Load("testdata/good.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if a.Truth.Len() != 4 || a.Reco.Len() != 6 {
		t.Errorf("schemes of %d and %d bins, want 4 and 6", a.Truth.Len(), a.Reco.Len())
	}
	if a.RecoFile != filepath.Join("testdata", "reco-bins.yaml") {
		t.Errorf("reco file %q", a.RecoFile)
	}
	s := a.Simulation[0]
	if s.File != filepath.Join("testdata", "sim.csv") || s.Weight.Text != "w" || s.Weight.Line != 14 || s.Truth[0].Text != "xt" || s.Reco[0].Text != "xr" || s.Scale != 1 {
		t.Errorf("simulation %+v", s)
	}
	if a.Data.Kind != DataEvents || a.Data.Observables[0].Text != "xr" {
		t.Errorf("data %+v", a.Data)
	}
	b := a.Backgrounds[0]
	if b.Kind != DataTable || b.Scale != 2 || b.ScaleUncertainty != 0.1 {
		t.Errorf("background %+v", b)
	}
	if a.Unfolding.Iterations != 3 || a.Unfolding.Prior != "simulation" || a.Unfolding.Background != "model" {
		t.Errorf("unfolding %+v", a.Unfolding)
	}
	if a.Uncertainty.Covariance != "full" || a.Uncertainty.Seed != 7 {
		t.Errorf("uncertainty %+v", a.Uncertainty)
	}
	if a.Output.Folder != filepath.Join("testdata", "out") || len(a.Output.Formats) != len(result.DefaultFormats()) || a.Output.Luminosity != 2.5 {
		t.Errorf("output %+v", a.Output)
	}
}

// decodeErr decodes a variant of testdata/good.yaml with old replaced by
// new and returns the error.
func decodeErr(t *testing.T, old, new string) error {
	t.Helper()
	src := strings.Replace(goodText(t), old, new, 1)
	if !strings.Contains(src, new) {
		t.Fatalf("replacement %q not applied", old)
	}
	_, err := Decode([]byte(src), "testdata/bad.yaml")
	if err == nil {
		t.Fatalf("no error for %q → %q", old, new)
	}
	return err
}

func TestDecodeErrors(t *testing.T) {
	cases := []struct {
		old, new string
		want     string // substring of the message
	}{
		{"  iterations: 3", "  iteratons: 3", `testdata/bad.yaml:26: iteratons: unknown key in unfolding (known keys: method, iterations,`},
		{"  iterations: 3", "  method: lucky\n  iterations: 3", `testdata/bad.yaml:26: unfolding.method: unknown value "lucky" (one of: dagostini, tikhonov, inversion, bin-by-bin)`},
		{"  iterations: 3", "  method: tikhonov\n  iterations: 3", `testdata/bad.yaml:27: unfolding.iterations: applies only to method dagostini (unfolding.method is tikhonov)`},
		{"  iterations: 3", "  tau: 0.5", `testdata/bad.yaml:26: unfolding.tau: applies only to method tikhonov (unfolding.method is dagostini)`},
		{"  iterations: 3", "  method: tikhonov\n  tau: -1", `testdata/bad.yaml:27: unfolding.tau: must be a tau > 0`},
		{"  iterations: 3", "  method: tikhonov\n  tau: 1\n  tau_criterion: lcurve", `testdata/bad.yaml:27: unfolding.tau: give either tau (a fixed tau) or tau_criterion`},
		{"  iterations: 3", "  method: tikhonov\n  tau_criterion: best", `testdata/bad.yaml:27: unfolding.tau_criterion: tikhonov: unknown tau criterion "best" (want lcurve, correlation)`},
		{"  iterations: 3", "  method: tikhonov\n  penalty: wiggle", `testdata/bad.yaml:27: unfolding.penalty: tikhonov: unknown penalty "wiggle" (want curvature, slope)`},
		{"  iterations: 3", "  method: tikhonov\n  bias: data", `testdata/bad.yaml:27: unfolding.bias: tikhonov: unknown bias "data" (want zero, prior)`},
		{"  iterations: 3", "  method: tikhonov\n  divide_by_widths: 2", `testdata/bad.yaml:27: unfolding.divide_by_widths:`},
		{"  iterations: 3", "  penalty: slope", `testdata/bad.yaml:26: unfolding.penalty: applies only to method tikhonov (unfolding.method is dagostini)`},
		{"  iterations: 3", "  method: bin-by-bin", `testdata/bad.yaml:26: unfolding.method: bin-by-bin needs the same truth and reco binning`},
		{"title: test analysis", "titel: x", `testdata/bad.yaml:1: titel: unknown key in the top level`},
		{"    weight: w\n    truth_selection", "    wieght: w\n    truth_selection", `testdata/bad.yaml:14: wieght: unknown key in a simulation sample`},
		{"  iterations: 3", "  iterations: three", `testdata/bad.yaml:26: unfolding.iterations: value three is a string, want a whole number`},
		{"  covariance: full", "  covariance: some", `testdata/bad.yaml:28: uncertainty.covariance: unknown value "some" (one of: none, diag, full)`},
		{`  reco: {x: "xr"}`, `  reco: {z: "xr"}`, `testdata/bad.yaml:11: observables.reco.z: the binning has no axis "z"`},
		{"  folder: out", "  folder: ''", `result.folder: missing`},
		{"    scale: 2\n", "    scale: -2\n", `testdata/bad.yaml:23: backgrounds[0].scale: must be a finite number > 0`},
		{"  iterations: 3", "  iterations: 3\n  stop_chi2: 0.1", `unfolding.iterations: give either a fixed number of iterations or a stopping χ², not both`},
		{"  events: data.csv", "  events: data.csv\n  table: n.csv", `data: give exactly one of`},
		{"  - file: sim.csv\n    weight: w\n    truth_selection: pt\n    reco_selection: pr", "  file: sim.csv\n  weight: w\n  truth_selection: pt\n  reco_selection: pr", `testdata/bad.yaml:13: simulation: the value is a mapping, want a list of simulated samples`},
		{"  - file: sim.csv", "  - file: sim.txt", `testdata/bad.yaml:13: simulation[0].file: unknown events format of "sim.txt"`},
		// A scalar of the wrong type is named with its YAML kind and the
		// right article.
		{"  iterations: 3", "  iterations: [3]", `testdata/bad.yaml:26: unfolding.iterations: the value is a list, want a whole number`},
		{"  folder: out", "  folder: out\n  formats: 5", `value 5 is an integer, want a list`},
		// The field of a wrong value is its own path, also inside a list
		// or when the wrong value is a mapping.
		{"  folder: out", "  folder: out\n  formats: [json, [csv]]", `testdata/bad.yaml:32: output.formats[1]: the value is a list, want a string`},
		{"  iterations: 3", "  iterations: {n: 3}", `testdata/bad.yaml:26: unfolding.iterations: the value is a mapping, want a whole number`},
		{"  iterations: 3", "  iterations: 3\n  iterations: 4", `testdata/bad.yaml:27: unfolding.iterations: given twice (first on line 26)`},
		{"title: test analysis", "title: [a, b]", `testdata/bad.yaml:1: title: the value is a list, want a string`},
		// A limit that truncates to 0 bytes (the kernel's default) is refused.
		{"  iterations: 3", "  iterations: 3\n  memory_limit_gib: 1e-12", `testdata/bad.yaml:27: unfolding.memory_limit_gib: must be a positive number of GiB`},
		{"  iterations: 3", "  iterations: 3\n  memory_limit_gib: 0", `testdata/bad.yaml:27: unfolding.memory_limit_gib: must be a positive number of GiB`},
		{"  iterations: 3", "  iterations: 3\n  memory_limit_gib: 1e300", `testdata/bad.yaml:27: unfolding.memory_limit_gib: must be a positive number of GiB`},
		// Each check of the decoder, one row each.
		{"simulation:\n  - file: sim.csv\n    weight: w\n    truth_selection: pt\n    reco_selection: pr\n", "", `simulation: missing: list the simulated samples`},
		{"    table: b.csv", "    table: b.csv\n    events: bkg.csv", `testdata/bad.yaml:21: backgrounds[0]: give either events or table, not both`},
		{"    table: b.csv", "    events: bkg.txt", `testdata/bad.yaml:22: backgrounds[0].events: unknown events format of "bkg.txt"`},
		{"    table: b.csv", "    table: b.csv\n    weight: w", `testdata/bad.yaml:23: backgrounds[0].weight: applies to an events file only`},
		{"    table: b.csv", "    tree: t", `testdata/bad.yaml:21: backgrounds[0]: missing: give events`},
		{"    scale_uncertainty: 0.1", "    scale_uncertainty: -0.1", `testdata/bad.yaml:24: backgrounds[0].scale_uncertainty: must be a finite relative uncertainty`},
		{"  iterations: 3", "  iterations: -1", `testdata/bad.yaml:26: unfolding.iterations: must be ≥ 1`},
		{"  iterations: 3", "  stop_chi2: -1", `testdata/bad.yaml:26: unfolding.stop_chi2: must be a finite number > 0`},
		{"  iterations: 3", "  stop_chi2: 0.1\n  max_iterations: -2", `testdata/bad.yaml:27: unfolding.max_iterations: must be ≥ 1`},
		{"  iterations: 3", "  iterations: 3\n  max_iterations: 20", `testdata/bad.yaml:27: unfolding.max_iterations: bounds the stopping rule`},
		{"  iterations: 3", "  iterations: 3\n  prior_file: p.csv", `testdata/bad.yaml:27: unfolding.prior_file: is used only with prior: file`},
		{"  iterations: 3", "  iterations: 3\n  prior: file", `testdata/bad.yaml:27: unfolding.prior_file: missing file name`},
		{"  iterations: 3", "  iterations: 3\n  smoothing: 1.5", `testdata/bad.yaml:27: unfolding.smoothing: must be a strength in (0, 1]`},
		{"  seed: 7", "  seed: 7\n  probes: 1", `testdata/bad.yaml:30: uncertainty.probes: must be at least 2`},
		{"  seed: 7", "  seed: 7\n  toys: -3", `testdata/bad.yaml:30: uncertainty.toys: must be at least 2`},
		{"  seed: 7", "  seed: 7\n  response_samples: 1", `testdata/bad.yaml:30: uncertainty.response_samples: must be 0 (no sampling) or at least 2`},
		{"  seed: 7", "  seed: 7\n  response_samples: -5", `testdata/bad.yaml:30: uncertainty.response_samples: must be 0 (no sampling) or at least 2`},
		{"  seed: 7", "  seed: 7\n  response_samples: many", `testdata/bad.yaml:30:`},
		{"  covariance: full", "  covariance: none\n  response_samples: 50", `testdata/bad.yaml:29: uncertainty.response_samples: needs an uncertainty of the data too`},
		{"  seed: 7", "  seed: 7\n  replicas: 1", `testdata/bad.yaml:30: uncertainty.replicas: must be 0 (no bootstrap) or at least 2`},
		{"  seed: 7", "  seed: 7\n  replicas: 2.5", `testdata/bad.yaml:30: uncertainty.replicas:`},
		{"  seed: 7", "  seed: 7\n  replicas: 50\n  response_samples: 50", `testdata/bad.yaml:30: uncertainty.replicas: cannot be combined with response samples`},
		{"  covariance: full", "  covariance: none\n  replicas: 50", `testdata/bad.yaml:29: uncertainty.replicas: needs an uncertainty of the data too`},
		{"  seed: 7", "  seed: 7\n  sampling_prior: uniform", `testdata/bad.yaml:30: uncertainty.sampling_prior: unknown value "uniform" (one of: none, flat)`},
		{"  seed: 7", "  seed: 7\n  method: gammas", `testdata/bad.yaml:30: uncertainty.method: unknown value "gammas" (one of: auto, exact, probes, toys, gamma)`},
		{"  folder: out", "  folder: out\n  formats: [json, png]", `testdata/bad.yaml:32: result.formats[1]: unknown format "png" (known: ` + strings.Join(result.Formats(), ", ") + `)`},
		{"  luminosity: 2.5", "  luminosity: -2.5", `testdata/bad.yaml:32: result.luminosity: must be a positive integrated luminosity`},
		{"  luminosity: 2.5", "  luminosity: 2.5\nprocessing:\n  workers: -1", `testdata/bad.yaml:34: processing.workers: must be between 0 (one per core) and 256`},
		{"  luminosity: 2.5", "  luminosity: 2.5\nprocessing:\n  workers: 100000", `testdata/bad.yaml:34: processing.workers: must be between 0 (one per core) and 256`},
		{"  luminosity: 2.5", "  luminosity: 2.5\nprocessing:\n  batch_size: -1", `testdata/bad.yaml:34: processing.batch_size: must be between 0 (the default) and 1048576 events`},
		{"  luminosity: 2.5", "  luminosity: 2.5\nprocessing:\n  batch_size: 1000000000", `testdata/bad.yaml:34: processing.batch_size: must be between 0 (the default) and 1048576 events`},
		{"  weight: w\nbackgrounds", "  weight: w\n  name: h\nbackgrounds", `testdata/bad.yaml:20: data.name: does not apply to this kind of data`},
		{"  events: data.csv", "  events: data.txt", `testdata/bad.yaml:18: data.events: unknown events format of "data.txt"`},
	}
	for _, c := range cases {
		err := decodeErr(t, c.old, c.new)
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q → %q:\n got %v\nwant %s", c.old, c.new, err, c.want)
		}
	}
}

// The bootstrap of the simulated events needs the events: with a saved
// response it is refused at its key (method.md §25 Bootstrap replicas
// of the simulated events).
func TestDecodeReplicasNeedEvents(t *testing.T) {
	text := strings.Replace(goodText(t), "simulation:\n  - file: sim.csv\n    weight: w\n    truth_selection: pt\n    reco_selection: pr\n", "response: r.bundle\n", 1)
	text = strings.Replace(text, "  seed: 7", "  seed: 7\n  replicas: 50", 1)
	_, err := Decode([]byte(text), "testdata/bad.yaml")
	if err == nil || !strings.Contains(err.Error(), "uncertainty.replicas: needs the simulated events") {
		t.Errorf("got %v, want a refusal of uncertainty.replicas", err)
	}
}

// An error inside an inline binning scheme keeps the analysis file's
// line numbers and names the field below binning.truth.
func TestInlineSchemeError(t *testing.T) {
	err := decodeErr(t, "edges: [0, 1, 2, 3]", "edges: [0, 2, 1, 3]")
	var be *binning.Error
	if !errors.As(err, &be) {
		t.Fatalf("got %T %v, want a *binning.Error", err, err)
	}
	if be.Line != 7 || be.File != "testdata/bad.yaml" || !strings.HasPrefix(be.Field, "binning.truth.regions[0].axes[0]") {
		t.Errorf("got %v (line %d, field %q)", err, be.Line, be.Field)
	}
}

func TestMissingSchemeFile(t *testing.T) {
	err := decodeErr(t, "reco: reco-bins.yaml", "reco: nowhere.yaml")
	if !strings.Contains(err.Error(), `testdata/bad.yaml:8: binning.reco: cannot read the binning scheme "nowhere.yaml"`) {
		t.Errorf("got %v", err)
	}
}

func goodText(t *testing.T) string {
	t.Helper()
	b, err := readFile("testdata/good.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

// The reference example of the documentation decodes, with every key.
func TestReferenceExample(t *testing.T) {
	a, err := Load("testdata/reference/analysis.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Simulation) != 2 || a.Simulation[1].Truth[a.Truth.AxisIndex("pt")].Text != "pt_true" ||
		a.Simulation[1].Truth[a.Truth.AxisIndex("y")].Text != "abs(y_true)" {
		t.Errorf("simulation %+v", a.Simulation)
	}
	if a.Backgrounds[0].Observables[a.Reco.AxisIndex("y")].Text != "abs(y_reco)" || a.Backgrounds[0].ScaleUncertainty != 0.1 {
		t.Errorf("background %+v", a.Backgrounds[0])
	}
	if a.Unfolding.MemoryLimit != 4<<30 || a.Output.LuminosityUnit != "fb^-1" || a.BatchSize != 16384 {
		t.Errorf("settings %+v %+v", a.Unfolding, a.Output)
	}
	if len(a.Stress) != 1 || a.Stress[0].Name != "harder-pt" || len(a.Stress[0].Weights) != a.Truth.Len() {
		t.Errorf("stress tests %+v", a.Stress)
	}
}

// An inline scheme in flow style on one line decodes, and its errors
// point at that line.
func TestInlineFlowScheme(t *testing.T) {
	old := `  truth:
    regions:
      - name: all
        axes:
          - {name: x, edges: [0, 1, 2, 3], overflow: true}
`
	src := strings.Replace(goodText(t), old, "  truth: {regions: [{name: all, axes: [{name: x, edges: [0, 1, 2, 3], overflow: true}]}]}\n", 1)
	a, err := Decode([]byte(src), "testdata/flow.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if a.Truth.Len() != 4 {
		t.Errorf("%d truth bins, want 4", a.Truth.Len())
	}
	bad := strings.Replace(src, "edges: [0, 1, 2, 3]", "edges: [0, 1, 1, 3]", 1)
	_, err = Decode([]byte(bad), "testdata/flow.yaml")
	var be *binning.Error
	if !errors.As(err, &be) || be.Line != 3 {
		t.Errorf("got %v, want a binning error on line 3", err)
	}
}

// Decoding never panics, whatever the bytes: every problem is an error.
func FuzzDecode(f *testing.F) {
	for _, p := range []string{"testdata/good.yaml", "testdata/reference/analysis.yaml"} {
		b, err := readFile(p)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b)
	}
	f.Add([]byte("binning: {truth: {regions: [{name: a, axes: [{name: x, edges: [0, 1]}]}]}}\n"))
	f.Fuzz(func(t *testing.T, src []byte) {
		a, err := Decode(src, "testdata/fuzz.yaml")
		if err == nil && (a.Truth == nil || a.Reco == nil) {
			t.Fatal("no error but no binning")
		}
	})
}

// A YAML syntax error names the file and the line the YAML library
// reports, without the library's "yaml: line N:" prefix.
func TestSyntaxErrorLine(t *testing.T) {
	_, err := Decode([]byte("title: x\nunfolding:\n  iterations: [3\n"), "testdata/bad.yaml")
	var e *Error
	if !errors.As(err, &e) || e.Line == 0 || strings.Contains(e.Msg, "line") || strings.HasPrefix(e.Msg, "yaml:") {
		t.Fatalf("got %#v, want an *Error with the line apart from the message", err)
	}
	if want := fmt.Sprintf("testdata/bad.yaml:%d: ", e.Line); !strings.HasPrefix(err.Error(), want) {
		t.Errorf("got %q, want it to start with %q", err, want)
	}
}

// unfolding.method chooses the method and its own keys its settings:
// tikhonov with tau_criterion gets the truth binning for its penalty;
// inversion has no settings of its own (bin-by-bin neither, but it is
// refused here: the file's truth and reco binnings differ).
func TestMethodSettings(t *testing.T) {
	for _, c := range []struct{ text, name string }{
		{"  method: tikhonov\n  tau_criterion: correlation", tikhonov.Name},
		{"  method: tikhonov\n  tau: 0.25", tikhonov.Name},
		{"  method: tikhonov\n  penalty: slope\n  divide_by_widths: true\n  bias: prior", tikhonov.Name},
		{"  method: inversion", "inversion"},
	} {
		a, err := Decode([]byte(strings.Replace(goodText(t), "  iterations: 3", c.text, 1)), "testdata/good.yaml")
		if err != nil {
			t.Fatalf("%q: %v", c.text, err)
		}
		_, m, err := a.Settings()
		if err != nil || m.Name() != c.name {
			t.Fatalf("%q: method %v, %v", c.text, m, err)
		}
		if tk, ok := m.(*tikhonov.Settings); ok {
			if tk.Truth != a.Truth || (tk.Tau == 0) != (tk.Criterion == tikhonov.Correlation || strings.Contains(c.text, "penalty")) {
				t.Errorf("%q: settings %+v", c.text, tk)
			}
			if strings.Contains(c.text, "penalty") && (tk.Penalty != tikhonov.Slope || !tk.Widths || tk.Bias != tikhonov.PriorBias) {
				t.Errorf("%q: penalty settings %+v", c.text, tk)
			}
		}
	}
}
