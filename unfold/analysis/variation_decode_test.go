package analysis

import (
	"strings"
	"testing"
)

// variationsAt inserts a variations section before the output section
// of testdata/good.yaml (the section starts on line 30).
func variationsAt(text string) (old, new string) {
	return "output:\n  folder: out", "variations:\n" + text + "output:\n  folder: out"
}

func TestDecodeVariations(t *testing.T) {
	old, new := variationsAt(`  - name: model
    weight: "1 + 0.1*xt"
  - name: energy-scale
    up: {reco_observables: {x: "1.01*xr"}}
    down: {reco_observables: {x: "0.99*xr"}}
  - name: other-sample
    files: [sim2.csv]
  - name: norm
    background_scale: 1.2
    background: other
`)
	a, err := Decode([]byte(strings.Replace(goodText(t), old, new, 1)), "testdata/v.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Variations) != 5 {
		t.Fatalf("%d variations, want 4 and the background's scale", len(a.Variations))
	}
	v := a.Variations
	if v[0].Name != "model" || v[0].Change.Kind != ChangeWeight || v[0].Change.Weight.Text != "1 + 0.1*xt" || v[0].Change.Weight.Line != 32 {
		t.Errorf("reweighting %+v %+v", v[0], v[0].Change)
	}
	if v[1].Change != nil || v[1].Up.Kind != ChangeRecoObservables || v[1].Up.Reco[0].Text != "1.01*xr" || v[1].Down.Reco[0].Text != "0.99*xr" {
		t.Errorf("pair %+v", v[1])
	}
	if v[2].Change.Kind != ChangeFiles || !strings.HasSuffix(v[2].Change.Files[0], "testdata/sim2.csv") {
		t.Errorf("files %+v", v[2].Change)
	}
	if v[3].Change.Kind != ChangeBackgroundScale || v[3].Change.Scale != 1.2 || v[3].Change.Background != 0 {
		t.Errorf("background scale %+v", v[3].Change)
	}
	// The background's scale_uncertainty 0.1 is a source of its own.
	if v[4].Name != "other-scale" || v[4].Change.Kind != ChangeBackgroundScale || v[4].Change.Scale != 1.1 || v[4].Change.Background != 0 || v[4].Line != 24 {
		t.Errorf("scale uncertainty %+v %+v", v[4], v[4].Change)
	}
	// The varied samples: the weight multiplies the sample's own.
	if s := a.samples(v[0].Change); s[0].Weight.Text != "(w)*(1 + 0.1*xt)" || a.Simulation[0].Weight.Text != "w" {
		t.Errorf("reweighted sample weight %q", s[0].Weight.Text)
	}
	if s := a.samples(v[1].Up); s[0].Reco[0].Text != "1.01*xr" || a.Simulation[0].Reco[0].Text != "xr" {
		t.Errorf("shifted observable %q", s[0].Reco[0].Text)
	}
}

func TestDecodeVariationErrors(t *testing.T) {
	cases := []struct {
		text, want string
	}{
		{"  - name: a\n    wieght: \"1\"\n", `testdata/bad.yaml:32: wieght: unknown key in a variation (known keys: name, files, weight, background_scale, background, reco_observables, up, down)`},
		{"  - name: a\n    up: {wieght: \"1\"}\n    down: {weight: \"1\"}\n", `testdata/bad.yaml:32: wieght: unknown key in a variation's up or down change`},
		{"  - weight: \"1\"\n", `testdata/bad.yaml:31: variations[0].name: missing: name the variation`},
		{"  - name: a\n", `testdata/bad.yaml:31: variations[0]: missing: give one change, or an up/down pair`},
		{"  - name: a\n    weight: \"1\"\n    background_scale: 1.1\n", `testdata/bad.yaml:33: variations[0].background_scale: give one change per variation (weight and background_scale given)`},
		{"  - name: a\n    weight: \"1\"\n  - name: a\n    weight: \"2\"\n", `testdata/bad.yaml:33: variations[1].name: "a" is the name of the variation on line 31 too`},
		{"  - name: data\n    weight: \"1\"\n", `testdata/bad.yaml:31: variations[0].name: "data" is the name of a statistical source`},
		{"  - name: total\n    weight: \"1\"\n", `testdata/bad.yaml:31: variations[0].name: "total" names a column of the breakdown tables`},
		{"  - name: other-scale\n    weight: \"1\"\n", `testdata/bad.yaml:24: backgrounds[0].scale_uncertainty: its source of uncertainty is named "other-scale", the name of a variation (line 31) too`},
		{"  - name: a\n    background_scale: .inf\n", `testdata/bad.yaml:32: variations[0].background_scale: must be a finite number > 0`},
		{"  - name: a\n    background_scale: .nan\n", `testdata/bad.yaml:32: variations[0].background_scale: must be a finite number > 0`},
		{"  - name: a\n    background_scale: 0\n", `testdata/bad.yaml:32: variations[0].background_scale: must be a finite number > 0`},
		{"  - name: a\n    background_scale: 1.1\n    background: nosuch\n", `testdata/bad.yaml:33: variations[0].background: no background is named "nosuch" (backgrounds: other)`},
		{"  - name: a\n    weight: \"2\"\n    background: other\n", `testdata/bad.yaml:33: variations[0].background: names the background of background_scale only`},
		{"  - name: a\n    up: {weight: \"2\"}\n", `testdata/bad.yaml:31: variations[0]: give both up and down`},
		{"  - name: a\n    weight: \"2\"\n    up: {weight: \"2\"}\n    down: {weight: \"0.5\"}\n", `testdata/bad.yaml:32: variations[0].weight: give either one change (weight) or an up/down pair, not both`},
		{"  - name: a\n    up: {weight: \"2\", files: [s.csv]}\n    down: {weight: \"0.5\"}\n", `testdata/bad.yaml:32: variations[0].up.weight: give one change per variation (files and weight given)`},
		{"  - name: a\n    files: [a.csv, b.csv]\n", `testdata/bad.yaml:32: variations[0].files: lists 2 files for 1 simulated samples`},
		{"  - name: a\n    files: [a.txt]\n", `testdata/bad.yaml:32: variations[0].files[0]: unknown events format of "a.txt"`},
		{"  - name: a\n    weight: \"  \"\n", `testdata/bad.yaml:32: variations[0].weight: missing: a weight expression`},
		{"  - name: a\n    reco_observables: {z: \"xr\"}\n", `testdata/bad.yaml:32: variations[0].reco_observables.z: the reco binning has no axis "z"`},
		{"  - name: a\n    reco_observables: \"xr\"\n", `testdata/bad.yaml:32: variations[0].reco_observables: want a mapping from reco axis name to expression`},
		{"  - name: a\n    weight: [1]\n", `testdata/bad.yaml:32: variations[0].weight: the value is a list, want a string`},
		{"  name: a\n", `testdata/bad.yaml:31: variations: the value is a mapping, want a list of variations`},
	}
	for _, c := range cases {
		old, new := variationsAt(c.text)
		err := decodeErr(t, old, new)
		if !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q:\n got %v\nwant %s", c.text, err, c.want)
		}
	}
	// Variations add to an uncertainty: refused without one.
	old, new := variationsAt("  - name: a\n    weight: \"2\"\n")
	src := strings.Replace(strings.Replace(goodText(t), old, new, 1), "  covariance: full", "  covariance: none", 1)
	if _, err := Decode([]byte(src), "testdata/bad.yaml"); err == nil || !strings.Contains(err.Error(), `testdata/bad.yaml:28: uncertainty.covariance: is none, but the systematic variations (a) add to an uncertainty`) {
		t.Errorf("covariance none: %v", err)
	}
	// A saved response cannot be varied.
	src = strings.Replace(strings.Replace(goodText(t), old, new, 1), "simulation:\n  - file: sim.csv\n    weight: w\n    truth_selection: pt\n    reco_selection: pr\n", "response: saved\n", 1)
	if _, err := Decode([]byte(src), "testdata/bad.yaml"); err == nil || !strings.Contains(err.Error(), `variations[0].weight: changes the simulation, but the file lists no simulated samples`) {
		t.Errorf("saved response: %v", err)
	}
}
