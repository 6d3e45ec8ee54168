package binning

import (
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"slices"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"
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
		{"region not a mapping", `
regions:
  - 3
`, 3, "regions[0]", "expected a mapping"},
		{"key not a name", `
regions:
  - {[a]: 1}
`, 3, "regions[0]", "expected a key name"},
		{"description not text", `
description: [a, b]
regions:
  - name: a
    axes: [{name: x, edges: [0, 1]}]
`, 2, "description", "expected a text value"},
		{"region without name", `
regions:
  - axes: [{name: x, edges: [0, 1]}]
`, 3, "regions[0].name", "missing"},
		{"region name null", `
regions:
  - name: ~
    axes: [{name: x, edges: [0, 1]}]
`, 3, "regions[0].name", "expected a text value, found nothing (null)"},
		{"empty region name", `
regions:
  - name: ""
    axes: [{name: x, edges: [0, 1]}]
`, 3, "regions[0].name", "empty"},
		{"region without axes", `
regions:
  - name: a
`, 3, "regions[0].axes", "missing"},
		{"too many axes", `
regions:
  - name: a
    axes: [{name: a, edges: [0, 1]}, {name: b, edges: [0, 1]}, {name: c, edges: [0, 1]},
           {name: d, edges: [0, 1]}, {name: e, edges: [0, 1]}, {name: f, edges: [0, 1]},
           {name: g, edges: [0, 1]}, {name: h, edges: [0, 1]}, {name: i, edges: [0, 1]}]
`, 4, "regions[0].axes", "at most 8"},
		{"axis without name", `
regions:
  - name: a
    axes:
      - {edges: [0, 1]}
`, 5, "regions[0].axes[0].name", "missing"},
		{"axis name not text", `
regions:
  - name: a
    axes:
      - {name: {x: 1}, edges: [0, 1]}
`, 5, "regions[0].axes[0].name", "expected a text value, found a mapping"},
		{"empty axis name", `
regions:
  - name: a
    axes:
      - {name: "", edges: [0, 1]}
`, 5, "regions[0].axes[0].name", "empty"},
		{"unit not text", `
regions:
  - name: a
    axes:
      - {name: x, unit: [GeV], edges: [0, 1]}
`, 5, "regions[0].axes[0].unit", "expected a text value, found a list"},
		{"edges not a list", `
regions:
  - name: a
    axes:
      - {name: x, edges: 3}
`, 5, "regions[0].axes[0].edges", "expected a list of numbers"},
		{"edges_by_bin not a list", `
regions:
  - name: a
    axes:
      - {name: y, edges: [0, 1]}
      - {name: x, edges_by_bin: 3}
`, 6, "regions[0].axes[1].edges_by_bin", "expected a non-empty list of edge lists"},
		{"edges by bin after edges by bin", `
regions:
  - name: a
    axes:
      - {name: y, edges: [0, 1]}
      - {name: x, edges_by_bin: [[0, 1]]}
      - {name: z, edges_by_bin: [[0, 1]]}
`, 7, "regions[0].axes[2].edges_by_bin", "has edges by bin itself"},
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

// TestDecodeAliases checks that YAML anchors and aliases are followed for
// an axis, an edge list and an edge list inside edges_by_bin.
func TestDecodeAliases(t *testing.T) {
	s, err := Decode(strings.NewReader(`
regions:
  - name: a
    axes:
      - &y {name: y, edges: &e [0, 1, 2]}
      - name: pt
        edges_by_bin: [*e, [0, 5]]
  - name: b
    axes:
      - *y
      - {name: pt, edges: *e}
`), "alias.yaml")
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"a y[0,1) pt[0,1)", "a y[0,1) pt[1,2)", "a y[1,2) pt[0,5)", "b y[0,1) pt[0,1)", "b y[0,1) pt[1,2)", "b y[1,2) pt[0,1)", "b y[1,2) pt[1,2)"}
	if s.Len() != len(want) || s.InRange() != len(want) {
		t.Fatalf("Len %d InRange %d, want %d and %d", s.Len(), s.InRange(), len(want), len(want))
	}
	for g, w := range want {
		if got := s.Label(g); got != w {
			t.Errorf("bin %d: %q, want %q", g, got, w)
		}
	}
}

// TestDecodeTooManyBins checks that a region, and a scheme, over MaxBins
// bins is an *Error at the region (or the regions list) instead of a
// table too large to hold.
func TestDecodeTooManyBins(t *testing.T) {
	list := func(n int) string {
		var b strings.Builder
		b.WriteByte('[')
		for i := 0; i <= n; i++ {
			if i > 0 {
				b.WriteString(", ")
			}
			fmt.Fprint(&b, i)
		}
		b.WriteByte(']')
		return b.String()
	}
	big := list(1000)
	region := fmt.Sprintf("regions:\n  - name: a\n    axes:\n      - {name: x, edges: %s}\n      - {name: y, edges: %s}\n      - {name: z, edges: %s}\n", big, big, big)
	_, err := Decode(strings.NewReader(region), "big.yaml")
	var e *Error
	if !errors.As(err, &e) || e.Line != 2 || e.Field != "regions[0]" || !strings.Contains(e.Msg, "at most") {
		t.Errorf("a 1e9-bin region: %v, want an *Error at line 2, regions[0], saying at most", err)
	}
	// Three regions of 2^26 bins each: every region fits, the scheme does not.
	half := list(1 << 13)
	var b strings.Builder
	b.WriteString("regions:\n")
	for _, name := range []string{"a", "b", "c"} {
		fmt.Fprintf(&b, "  - name: %s\n    axes:\n      - {name: x, edges: %s}\n      - {name: y, edges: %s}\n", name, half, half)
	}
	_, err = Decode(strings.NewReader(b.String()), "big.yaml")
	if !errors.As(err, &e) || e.Line != 2 || e.Field != "regions" || !strings.Contains(e.Msg, "at most") {
		t.Errorf("a scheme of 3·2^26 bins: %v, want an *Error at line 2, regions, saying at most", err)
	}
}

// A scheme inside a larger YAML document decodes from its node, the
// same as from its own file, and its errors keep the positions of the
// larger document with the field below the node.
func TestDecodeNode(t *testing.T) {
	const outer = `title: outer
scheme:
  regions:
    - name: a
      axes: [{name: x, edges: [0, 1, 2]}]
`
	var doc yaml.Node
	if err := yaml.Unmarshal([]byte(outer), &doc); err != nil {
		t.Fatal(err)
	}
	n := doc.Content[0].Content[3]
	s, err := DecodeNode(n, "outer.yaml")
	if err != nil {
		t.Fatal(err)
	}
	if s.Len() != 2 {
		t.Errorf("%d bins, want 2", s.Len())
	}
	bad := strings.Replace(outer, "[0, 1, 2]", "[0, 2, 1]", 1)
	if err := yaml.Unmarshal([]byte(bad), &doc); err != nil {
		t.Fatal(err)
	}
	_, err = DecodeNode(doc.Content[0].Content[3], "outer.yaml")
	var e *Error
	if !errors.As(err, &e) || e.File != "outer.yaml" || e.Line != 5 || e.Field != "regions[0].axes[0].edges[2]" {
		t.Errorf("got %#v, want an *Error at outer.yaml:5 on regions[0].axes[0].edges[2]", err)
	}
	if _, err := DecodeNode(nil, "outer.yaml"); err == nil {
		t.Error("no error for a nil node")
	}
}
