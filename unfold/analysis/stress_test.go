package analysis

import (
	"strings"
	"testing"
)

// The stress tests of validation.stress: the weight expression is
// evaluated over the truth axis at the bin centres (the overflow bin at
// the last edge), and every problem names the file, the line and the key.
func TestStressTests(t *testing.T) {
	src := goodText(t) + "validation:\n  stress:\n    - name: steeper\n      weight: \"1 + 0.5*x\"\n    - name: flat\n      weight: \"1\"\n"
	a, err := Decode([]byte(src), "testdata/v.yaml")
	if err != nil {
		t.Fatal(err)
	}
	// bins [0,1), [1,2), [2,3), overflow: centres 0.5, 1.5, 2.5 and the edge 3
	want := []float64{1.25, 1.75, 2.25, 2.5}
	if len(a.Stress) != 2 || a.Stress[0].Name != "steeper" || a.Stress[0].Weight.Line != 36 {
		t.Fatalf("stress %+v", a.Stress)
	}
	for g, w := range want {
		if a.Stress[0].Weights[g] != w || a.Stress[1].Weights[g] != 1 {
			t.Errorf("bin %d: weights %v and %v, want %v and 1", g, a.Stress[0].Weights[g], a.Stress[1].Weights[g], w)
		}
	}
	for _, c := range []struct{ add, want string }{
		{"validation:\n  stress:\n    - name: a\n      weight: \"1 + y\"\n", `testdata/v.yaml:36: validation.stress[0].weight: in "1 + y": `},
		{"validation:\n  stress:\n    - name: a\n      weight: \"x - 2\"\n", `testdata/v.yaml:36: validation.stress[0].weight: the weight "x - 2" is -1.5 at truth bin 0`},
		{"validation:\n  stress:\n    - name: a\n", `testdata/v.yaml:35: validation.stress[0].weight: missing`},
		{"validation:\n  stress:\n    - weight: x\n", `validation.stress[0].name: missing`},
		{"validation:\n  stress:\n    - {name: a, weight: x}\n    - {name: a, weight: x}\n", `testdata/v.yaml:36: validation.stress[1].name: "a" is the name of the stress test on line 35 too`},
		{"validation:\n  stress:\n    - {name: tilt-x, weight: x}\n", `validation.stress[0].name: "tilt-x" is a built-in name`},
		{"validation:\n  stress:\n    - {name: a, weigth: x}\n", `testdata/v.yaml:35: weigth: unknown key in a stress test (known keys: name, weight)`},
		{"validation:\n  stres: []\n", `testdata/v.yaml:34: stres: unknown key in validation (known keys: stress)`},
		{"validation:\n  stress: {name: a}\n", `validation.stress: the value is a mapping, want a list of stress tests`},
	} {
		_, err := Decode([]byte(goodText(t)+c.add), "testdata/v.yaml")
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: got %v, want %q", c.add, err, c.want)
		}
	}
}
