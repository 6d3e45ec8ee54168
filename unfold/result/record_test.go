package result

import (
	"bytes"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"go.yaml.in/yaml/v3"

	"github.com/desmear/desmear/binning"
)

// The test's own reading of the data-record format (its published key
// names: submission entries with name, description, keywords and
// data_file; tables of independent_variables and dependent_variables,
// each a header with name and units, qualifiers and values; values with
// low and high, or value and errors of symerror and label). Decoding
// with unknown keys refused checks that nothing else is written.
type (
	subEntry struct {
		Comment     string `yaml:"comment"`
		Name        string `yaml:"name"`
		Description string `yaml:"description"`
		Keywords    []struct {
			Name   string   `yaml:"name"`
			Values []string `yaml:"values"`
		} `yaml:"keywords"`
		DataFile string `yaml:"data_file"`
	}
	tableFile struct {
		Independent []variable `yaml:"independent_variables"`
		Dependent   []variable `yaml:"dependent_variables"`
	}
	variable struct {
		Header struct {
			Name  string `yaml:"name"`
			Units string `yaml:"units"`
		} `yaml:"header"`
		Qualifiers []struct {
			Name  string `yaml:"name"`
			Value string `yaml:"value"`
			Units string `yaml:"units"`
		} `yaml:"qualifiers"`
		Values []struct {
			Value  any      `yaml:"value"`
			Low    *float64 `yaml:"low"`
			High   *float64 `yaml:"high"`
			Errors []struct {
				Symerror float64 `yaml:"symerror"`
				Label    string  `yaml:"label"`
			} `yaml:"errors"`
		} `yaml:"values"`
	}
)

// decodeStrict decodes every YAML document of path into a new T.
func decodeStrict[T any](t *testing.T, path string) []T {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	var out []T
	for {
		var v T
		if err := dec.Decode(&v); errors.Is(err, io.EOF) {
			return out
		} else if err != nil {
			t.Fatalf("%s: %v", path, err)
		}
		out = append(out, v)
	}
}

// float returns a number read into an any: YAML integers decode as int.
func float(t *testing.T, v any) float64 {
	t.Helper()
	switch x := v.(type) {
	case int:
		return float64(x)
	case float64:
		return x
	}
	t.Fatalf("%v (%T) is not a number", v, v)
	return 0
}

// noisy matches a number printed with more than ten significant digits
// (such as 2.4000000000000004).
var noisy = regexp.MustCompile(`\d\.?\d{10,}`)

// The record folder of a 2-D result with a flow bin and a full
// covariance, read back strictly: the submission lists one table per
// slice and one covariance per region; the tables hold the bin edges of
// the binning, the estimate and the density with their uncertainties
// within the rounding (uncertainty to two significant digits, value to
// the same decimal place: common practice), and the covariance of the
// densities, C_jk / (V_j V_k) (method.md §2 gives the density as the
// estimate over the bin volume).
func TestRecord(t *testing.T) {
	s, err := binning.Decode(strings.NewReader(`regions:
  - name: c
    axes:
      - {name: y, edges: [0, 0.8, 1.6]}
      - {name: pt, unit: GeV, edges: [20, 25, 32.5], overflow: true}
  - name: f
    axes:
      - {name: pt, unit: GeV, edges: [0, 5, 20]}
`), "s.yaml")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len()
	r := &Result{Format: Format, FormatVersion: FormatVersion, TruthBins: n, Estimate: make([]float64, n), Uncertainty: make([]float64, n),
		Determined: make([]bool, n), Efficiency: make([]float64, n), Covariance: make([][]float64, n), Program: Program{Name: "desmear", Version: "test"}}
	for g := range n {
		r.Estimate[g], r.Uncertainty[g] = 2.4000000000000004*float64(100+17*g), 1.2345678*float64(g+1)
		r.Determined[g], r.Efficiency[g] = true, 0.5
		r.Covariance[g] = make([]float64, n)
		for k := range n {
			r.Covariance[g][k] = 0.1 * r.Uncertainty[g] * r.Uncertainty[k]
		}
		r.Covariance[g][g] = r.Uncertainty[g] * r.Uncertainty[g]
	}
	dir, _ := writeFolder(t, t.TempDir(), "r", r, s)
	rec := filepath.Join(dir, RecordFolder)
	subs := decodeStrict[subEntry](t, filepath.Join(dir, SubmissionFile))
	slices := Slices(s)
	if len(subs) != 1+len(slices)+len(s.Regions()) || subs[0].Comment == "" {
		t.Fatalf("submission.yaml: %d documents, want a comment and %d tables", len(subs), len(slices)+len(s.Regions()))
	}
	dens, densUnc := Densities(s, r.Estimate, r.Uncertainty, 0)
	within := func(got, want, unc float64) bool { return math.Abs(got-want) <= 0.05*unc+1e-9*math.Abs(want) }
	for k, sl := range slices {
		sub := subs[1+k]
		if sub.Name == "" || sub.Description == "" || len(sub.Keywords) == 0 || sub.DataFile != RecordTableFile(s, &sl) {
			t.Errorf("table %d: %+v", k, sub)
		}
		raw, err := os.ReadFile(filepath.Join(rec, sub.DataFile))
		if err != nil {
			t.Fatal(err)
		}
		if m := noisy.Find(raw); m != nil {
			t.Errorf("%s holds the unrounded number %s", sub.DataFile, m)
		}
		tab := decodeStrict[tableFile](t, filepath.Join(rec, sub.DataFile))[0]
		if len(tab.Independent) != 1 || len(tab.Dependent) != 2 {
			t.Fatalf("%s: %d independent, %d dependent variables", sub.DataFile, len(tab.Independent), len(tab.Dependent))
		}
		ind := tab.Independent[0]
		if ind.Header.Name != "pt" || ind.Header.Units != "GeV" || len(ind.Values) != len(sl.Edges)-1 {
			t.Errorf("%s: independent %+v", sub.DataFile, ind.Header)
		}
		for i, v := range ind.Values {
			if *v.Low != sl.Edges[i] || *v.High != sl.Edges[i+1] {
				t.Errorf("%s: bin %d is [%v, %v), want [%v, %v)", sub.DataFile, i, *v.Low, *v.High, sl.Edges[i], sl.Edges[i+1])
			}
		}
		if tab.Dependent[1].Header.Units != "1/GeV" {
			t.Errorf("%s: density units %q", sub.DataFile, tab.Dependent[1].Header.Units)
		}
		for i, g := range sl.Bins() {
			c, d := tab.Dependent[0].Values[i], tab.Dependent[1].Values[i]
			if !within(float(t, c.Value), r.Estimate[g], r.Uncertainty[g]) || !within(c.Errors[0].Symerror, r.Uncertainty[g], r.Uncertainty[g]) || c.Errors[0].Label != "stat" {
				t.Errorf("%s: bin %d counts %v ± %v, want %v ± %v", sub.DataFile, i, c.Value, c.Errors[0].Symerror, r.Estimate[g], r.Uncertainty[g])
			}
			if !within(float(t, d.Value), dens[g], densUnc[g]) || !within(d.Errors[0].Symerror, densUnc[g], densUnc[g]) {
				t.Errorf("%s: bin %d density %v ± %v, want %v ± %v", sub.DataFile, i, d.Value, d.Errors[0].Symerror, dens[g], densUnc[g])
			}
		}
	}
	for k, reg := range s.Regions() {
		sub := subs[1+len(slices)+k]
		if sub.DataFile != RecordCovarianceFile(reg.Name()) {
			t.Fatalf("covariance entry %+v", sub)
		}
		tab := decodeStrict[tableFile](t, filepath.Join(rec, sub.DataFile))[0]
		lo, hi := s.Span(k)
		m := hi - lo
		if len(tab.Independent) != 2 || len(tab.Dependent) != 1 || len(tab.Dependent[0].Values) != m*m {
			t.Fatalf("%s: %d×%d variables, %d values, want %d", sub.DataFile, len(tab.Independent), len(tab.Dependent), len(tab.Dependent[0].Values), m*m)
		}
		for a := 0; a < m; a++ {
			for b := 0; b < m; b++ {
				i, j := lo+a, lo+b
				v := tab.Dependent[0].Values[a*m+b]
				want := r.Covariance[i][j] / (s.Bin(i).Volume * s.Bin(j).Volume)
				if got := float(t, v.Value); math.Abs(got-want) > 1e-3*math.Abs(want) || tab.Independent[0].Values[a*m+b].Value != s.Label(i) || tab.Independent[1].Values[a*m+b].Value != s.Label(j) {
					t.Errorf("%s: [%d][%d] = %v, want %v", sub.DataFile, a, b, got, want)
				}
			}
		}
	}
}

// Rounding keeps two significant digits of the uncertainty and the value
// to the same decimal place (common practice), printing without binary
// noise.
func TestRecordRounding(t *testing.T) {
	for _, c := range []struct{ v, u, wantV, wantU float64 }{
		{2.4000000000000004, 0.123, 2.40, 0.12},
		{1147.6436, 47.2117, 1148, 47},
		{0.00123456, 0.0000987, 0.001235, 0.000099},
		{98765, 4321, 98800, 4300},
		{0, 3.3, 0, 3.3},
	} {
		got := recordMeasured(c.v, c.u)
		if got.Value.(float64) != c.wantV || got.Errors[0].Symerror != c.wantU {
			t.Errorf("recordMeasured(%v, %v) = %v ± %v, want %v ± %v", c.v, c.u, got.Value, got.Errors[0].Symerror, c.wantV, c.wantU)
		}
	}
}
