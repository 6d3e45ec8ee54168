package binning

import (
	"bytes"
	"errors"
	"io/fs"
	"math"
	"os"
	"slices"
	"strings"
	"testing"
)

// TestDecodeErrors checks that each problem in a scheme file is an *Error
// naming the file, the line and the field.
func TestDecodeErrors(t *testing.T) {
	cases := []struct {
		name  string
		yaml  string
		line  int
		field string
		msg   string // part of the message
	}{
		{"unknown top-level key", `
regions:
  - name: a
    axes: [{name: x, edges: [0, 1]}]
bins: 3
`, 5, "bins", "unknown key"},
		{"unknown axis key", `
regions:
  - name: a
    axes:
      - name: x
        edges: [0, 1]
        overflw: true
`, 7, "regions[0].axes[0].overflw", "unknown key"},
		{"non-increasing edges", `
regions:
  - name: a
    axes:
      - name: x
        edges: [0, 1, 1, 2]
`, 6, "regions[0].axes[0].edges[2]", "strictly increasing"},
		{"decreasing edges by bin", `
regions:
  - name: a
    axes:
      - {name: y, edges: [0, 1, 2]}
      - name: pt
        edges_by_bin:
          - [0, 1]
          - [5, 3]
`, 9, "regions[0].axes[1].edges_by_bin[1][1]", "strictly increasing"},
		{"NaN edge", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, .nan, 2]}
`, 5, "regions[0].axes[0].edges[1]", "not a finite number"},
		{"infinite edge", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, 1, .inf]}
`, 5, "regions[0].axes[0].edges[2]", "not a finite number"},
		{"duplicate region", `
regions:
  - name: a
    axes: [{name: x, edges: [0, 1]}]
  - name: a
    axes: [{name: x, edges: [1, 2]}]
`, 5, "regions[1].name", "already used"},
		{"duplicate axis", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, 1]}
      - {name: x, edges: [0, 1]}
`, 6, "regions[0].axes[1].name", "already used"},
		{"edges_by_bin length", `
regions:
  - name: a
    axes:
      - {name: y, edges: [0, 1, 2, 3]}
      - name: pt
        edges_by_bin:
          - [0, 1]
          - [0, 2]
`, 8, "regions[0].axes[1].edges_by_bin", "2 edge lists"},
		{"empty axis", `
regions:
  - name: a
    axes:
      - {name: x, edges: []}
`, 5, "regions[0].axes[0].edges", "empty axis"},
		{"one edge", `
regions:
  - name: a
    axes:
      - {name: x, edges: [3]}
`, 5, "regions[0].axes[0].edges", "at least two edges"},
		{"no edges", `
regions:
  - name: a
    axes:
      - {name: x, unit: GeV}
`, 5, "regions[0].axes[0].edges", "missing"},
		{"both edges kinds", `
regions:
  - name: a
    axes:
      - {name: y, edges: [0, 1]}
      - {name: x, edges: [0, 1], edges_by_bin: [[0, 1]]}
`, 6, "regions[0].axes[1].edges_by_bin", "both"},
		{"edges by bin first", `
regions:
  - name: a
    axes:
      - {name: x, edges_by_bin: [[0, 1]]}
`, 5, "regions[0].axes[0].edges_by_bin", "first axis"},
		{"no axes", `
regions:
  - name: a
    axes: []
`, 4, "regions[0].axes", "expected a non-empty list of axes, found an empty list"},
		{"no regions", `
regions: []
`, 2, "regions", "expected a non-empty list of regions, found an empty list"},
		{"edge not a number", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, one, 2]}
`, 5, "regions[0].axes[0].edges[1]", "expected a number"},
		{"flag not a bool", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, 1], overflow: maybe}
`, 5, "regions[0].axes[0].overflow", "true or false"},
		{"unit clash", `
regions:
  - name: a
    axes: [{name: pt, unit: GeV, edges: [0, 1]}]
  - name: b
    axes: [{name: pt, unit: MeV, edges: [0, 1]}]
`, 6, "regions[1].axes[0].unit", "one unit"},
		{"key twice", `
regions:
  - name: a
    axes:
      - {name: x, edges: [0, 1], edges: [0, 2]}
`, 5, "regions[0].axes[0].edges", "twice"},
		{"no regions", `
description: nothing
`, 2, "regions", "missing"},
		{"empty file", ``, 0, "", "empty"},
		{"bad yaml", "regions: [\n", 1, "", "not valid YAML"},
	}
	for _, c := range cases {
		_, err := Decode(strings.NewReader(c.yaml), "bins.yaml")
		var e *Error
		if !errors.As(err, &e) {
			t.Errorf("%s: error %v, want an *Error", c.name, err)
			continue
		}
		if e.File != "bins.yaml" || e.Line != c.line || e.Field != c.field || !strings.Contains(e.Msg, c.msg) {
			t.Errorf("%s: got file %q line %d field %q msg %q; want bins.yaml line %d field %q msg containing %q",
				c.name, e.File, e.Line, e.Field, e.Msg, c.line, c.field, c.msg)
		}
		if !strings.HasPrefix(err.Error(), "bins.yaml") {
			t.Errorf("%s: message %q does not start with the file name", c.name, err)
		}
	}
}

func TestDecodeDefaults(t *testing.T) {
	s, err := Decode(strings.NewReader(`
regions:
  - name: a
    axes:
      - {name: x, unit: cm, edges: [0, 1.5, 4], underflow: true}
      - {name: z, edges: [-1, 1]}
`), "t.yaml")
	if err != nil {
		t.Fatal(err)
	}
	a := s.Regions()[0].Axes()
	if !a[0].Underflow() || a[0].Overflow() || a[1].Underflow() || a[1].Overflow() {
		t.Errorf("flags: %v %v %v %v; underflow and overflow default to false", a[0].Underflow(), a[0].Overflow(), a[1].Underflow(), a[1].Overflow())
	}
	if u, _ := s.AxisUnit("x"); u != "cm" || !slices.Equal(a[0].Edges(), []float64{0, 1.5, 4}) {
		t.Errorf("axis x: unit %q edges %v", u, a[0].Edges())
	}
	// 2 x 1 in-range bins and one flow bin (x underflow, z bin 0).
	if s.Len() != 3 || s.InRange() != 2 {
		t.Errorf("Len %d InRange %d, want 3 and 2", s.Len(), s.InRange())
	}
}

func TestReadFileMissing(t *testing.T) {
	_, err := ReadFile("../testdata/does-not-exist.yaml")
	if !errors.Is(err, fs.ErrNotExist) {
		t.Errorf("ReadFile of a missing file: %v, want fs.ErrNotExist", err)
	}
}

// TestEncodeRoundTrip writes each testdata scheme as YAML, decodes it again
// and compares every global bin.
func TestEncodeRoundTrip(t *testing.T) {
	for _, f := range []string{"scheme2d.yaml", "scheme3d.yaml"} {
		s := readTestdata(t, f)
		var b strings.Builder
		if err := s.WriteYAML(&b); err != nil {
			t.Fatal(err)
		}
		s2, err := Decode(strings.NewReader(b.String()), "encoded")
		if err != nil {
			t.Fatalf("%s: decoding the encoded scheme: %v\n%s", f, err, b.String())
		}
		if s2.Len() != s.Len() || s2.InRange() != s.InRange() {
			t.Fatalf("%s: %d/%d bins after the round trip, want %d/%d", f, s2.Len(), s2.InRange(), s.Len(), s.InRange())
		}
		for g := 0; g < s.Len(); g++ {
			if s.Label(g) != s2.Label(g) {
				t.Errorf("%s: bin %d is %q after the round trip, want %q", f, g, s2.Label(g), s.Label(g))
			}
		}
	}
	// Edges that need all 17 digits survive.
	ax, _ := NewAxis("x", "", []float64{0.1, 0.1 + 1e-16*3, math.Pi}, false, true)
	reg, _ := NewRegion("r", ax)
	s, _ := NewScheme(reg)
	var b strings.Builder
	if err := s.WriteYAML(&b); err != nil {
		t.Fatal(err)
	}
	s2, err := Decode(strings.NewReader(b.String()), "encoded")
	if err != nil {
		t.Fatal(err)
	}
	if got := s2.Regions()[0].Axes()[0].Edges(); !slices.Equal(got, ax.Edges()) {
		t.Errorf("edges %v after the round trip, want %v", got, ax.Edges())
	}
}

// FuzzDecode: no input makes Decode panic, every failure is an *Error or
// a read error, and every scheme it accepts survives WriteYAML and Decode
// with the same bins.
func FuzzDecode(f *testing.F) {
	for _, name := range []string{"scheme2d.yaml", "scheme3d.yaml"} {
		data, err := os.ReadFile("../testdata/" + name)
		if err != nil {
			f.Fatal(err)
		}
		f.Add(data)
	}
	f.Add([]byte("regions: [{name: a, axes: [{name: x, edges: [0, 1], overflow: true}]}]"))
	f.Add([]byte("regions: [{name: a, axes: [{name: x, edges: [0, 1]}, {name: y, edges_by_bin: [[0, 1, 2]]}]}]"))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Decode(bytes.NewReader(data), "fuzz.yaml")
		if err != nil {
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %v is not an *Error", err)
			}
			return
		}
		if s.Len() > 1e6 {
			return
		}
		var b bytes.Buffer
		if err := s.WriteYAML(&b); err != nil {
			t.Fatal(err)
		}
		s2, err := Decode(&b, "again.yaml")
		if err != nil {
			t.Fatalf("re-decoding: %v\n%s", err, b.String())
		}
		if s2.Len() != s.Len() || s2.InRange() != s.InRange() {
			t.Fatalf("%d/%d bins after the round trip, want %d/%d", s2.Len(), s2.InRange(), s.Len(), s.InRange())
		}
		for g := 0; g < s.Len(); g++ {
			if s.Label(g) != s2.Label(g) {
				t.Fatalf("bin %d: %q after the round trip, want %q", g, s2.Label(g), s.Label(g))
			}
		}
	})
}
