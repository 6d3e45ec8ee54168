package result

import (
	"bytes"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"gonum.org/v1/gonum/mat"
)

func TestWriteJSONRefusesNaN(t *testing.T) {
	f, err := New(filepath.Join(t.TempDir(), "run"), false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if err := WriteJSON(f, "x.json", []float64{math.NaN()}); err == nil {
		t.Error("WriteJSON wrote a NaN")
	}
}

func kernelResult() *unfold.Result {
	cov := mat.NewSymDense(3, []float64{4, 1, 99, 1, 9, 99, 99, 99, 99})
	return &unfold.Result{
		Estimate:   []float64{10, 20, 123},
		Determined: []bool{true, true, false},
		Efficiency: []float64{0.5, 0.8, 0},
		Folded:     []float64{3, 4},
		Details: &bayes.Details{Iterations: 2,
			History: []bayes.Step{{Iteration: 0, LogLikelihood: -3}, {Iteration: 1, Chi2: 2, Change: 0.1, LogLikelihood: -2}, {Iteration: 2, Chi2: 1, Change: 0.05, LogLikelihood: -1}}},
		Uncertainty:       []float64{2, 3, math.NaN()},
		Covariance:        cov,
		UncertaintyMethod: "linearised",
	}
}

func TestFromUnfold(t *testing.T) {
	r, err := FromUnfold(kernelResult())
	if err != nil {
		t.Fatal(err)
	}
	// The bin that is not determined is 0 everywhere, never NaN.
	if r.Estimate[2] != 0 || r.Uncertainty[2] != 0 || r.Covariance[2][2] != 0 || r.Covariance[0][2] != 0 {
		t.Errorf("undetermined bin: estimate %v, uncertainty %v, covariance row %v", r.Estimate[2], r.Uncertainty[2], r.Covariance[2])
	}
	if r.Covariance[0][1] != 1 || r.Covariance[1][1] != 9 || r.Estimate[1] != 20 {
		t.Errorf("covariance %v estimate %v", r.Covariance, r.Estimate)
	}
	data, err := json.Marshal(r)
	if err != nil {
		t.Fatal(err)
	}
	var back map[string]any
	if err := json.Unmarshal(data, &back); err != nil {
		t.Fatal(err)
	}
	for _, key := range []string{"estimate", "uncertainty", "covariance", "iterations", "history", "determined", "efficiency", "format", "settings", "inputs", "program"} {
		if _, ok := back[key]; !ok {
			t.Errorf("result.json lacks %q", key)
		}
	}
	bad := kernelResult()
	bad.Estimate[0] = math.Inf(1)
	if _, err := FromUnfold(bad); err == nil {
		t.Error("FromUnfold accepted an infinite estimate")
	}
}

func TestWriteCSV(t *testing.T) {
	r, err := FromUnfold(kernelResult())
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteCSV(&buf, r, nil); err != nil {
		t.Fatal(err)
	}
	want := "index,estimate,uncertainty,determined,efficiency\n0,10,2,true,0.5\n1,20,3,true,0.8\n2,0,0,false,0\n"
	if buf.String() != want {
		t.Errorf("result.csv without binning:\n%s\nwant\n%s", buf.String(), want)
	}

	// One axis with two in-range bins and an overflow bin: three global
	// bins, the flow bin last.
	ax, err := binning.NewAxis("pt", "GeV", []float64{0, 10, 30}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	reg, err := binning.NewRegion("all", ax)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(reg)
	if err != nil {
		t.Fatal(err)
	}
	buf.Reset()
	r.Uncertainty = nil
	if err := WriteCSV(&buf, r, s); err != nil {
		t.Fatal(err)
	}
	want = "index,region,flow,pt_low,pt_high,estimate,determined,efficiency\n0,all,false,0,10,10,true,0.5\n1,all,false,10,30,20,true,0.8\n2,all,true,30,inf,0,false,0\n"
	if buf.String() != want {
		t.Errorf("result.csv with binning:\n%s\nwant\n%s", buf.String(), want)
	}
	b := DescribeBinning(s, "T.yaml")
	if b.Bins != 3 || b.InRange != 2 || !b.Flow[2] || b.Axes[0] != (Axis{"pt", "GeV"}) || len(b.Labels) != 3 {
		t.Errorf("DescribeBinning = %+v", b)
	}
}

// The layout of WriteJSON is still JSON: it decodes to the same value as
// the standard library's own encoding (encoding/json as the reference).
func TestJSONLayout(t *testing.T) {
	v := map[string]any{
		"a":     []float64{1, 2.5, -3e-7},
		"empty": []int{},
		"obj":   map[string]any{},
		"s":     `tricky "[{,:}]" \ string`,
		"rows":  [][]float64{{1, 2}, {3, 4}},
		"list":  []map[string]int{{"x": 1}, {"y": 2}},
		"names": []string{"a,b", "c]"},
	}
	got, err := marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	var back, want any
	if err := json.Unmarshal(got, &back); err != nil {
		t.Fatalf("layout is not JSON: %v\n%s", err, got)
	}
	ref, _ := json.Marshal(v)
	json.Unmarshal(ref, &want)
	if !reflect.DeepEqual(back, want) {
		t.Errorf("layout changed the value:\n%s", got)
	}
	if !strings.Contains(string(got), `"a": [1, 2.5, -3e-7]`) || !strings.Contains(string(got), "\n    [1, 2],\n    [3, 4]\n") {
		t.Errorf("unexpected layout:\n%s", got)
	}
}

// The settings record fills in the kernel's documented defaults (the
// zero values of unfold.Settings mean "the default").
func TestDescribeSettings(t *testing.T) {
	d := DescribeSettings(nil, nil, "generated", false)
	if d.Iterations != bayes.DefaultIterations || d.StopChi2 != 0 || d.MaxIterations != 0 || d.MemoryLimit != unfold.DefaultMemoryLimit ||
		d.Covariance != unfold.NoCovariance.String() || d.DiagonalMethod != "" || d.Probes != 0 ||
		d.Toys != 0 || d.Background != "" || d.Smoothing != 0 || d.Prior != "generated" {
		t.Errorf("defaults: %+v", d)
	}
	if d := DescribeSettings(&unfold.Settings{Covariance: unfold.Diagonal}, nil, "generated", false); d.DiagonalMethod != unfold.DiagonalAuto.String() || d.Probes != unfold.DefaultProbes || d.Toys != 0 {
		t.Errorf("diagonal: %+v", d)
	}
	d = DescribeSettings(&unfold.Settings{Background: unfold.Subtract,
		Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, MemoryLimit: 1 << 20},
		&bayes.Settings{StopChi2: 0.5, Smoothing: &bayes.Smoothing{Neighbours: chain{}}}, "table", true)
	if d.Iterations != 0 || d.StopChi2 != 0.5 || d.MaxIterations != bayes.DefaultMaxIterations || d.Background != "subtract" ||
		d.Smoothing != 1 || d.Toys != unfold.DefaultToys || d.Probes != 0 || d.MemoryLimit != 1<<20 || d.Prior != "table" {
		t.Errorf("stopping rule, subtraction, smoothing, toys: %+v", d)
	}
	if d := DescribeSettings(&unfold.Settings{Covariance: unfold.Full}, nil, "generated", true); d.DiagonalMethod != "" || d.Probes != 0 || d.Background != "model" {
		t.Errorf("full covariance with a background in the model: %+v", d)
	}
}

// Write refuses a result holding a NaN or an infinity anywhere
// (JSON has no such numbers) and leaves no file in the folder; WriteCSV
// refuses a truth binning of another size.
func TestWriteRefuses(t *testing.T) {
	for name, spoil := range map[string]func(r *Result){
		"covariance": func(r *Result) { r.Covariance[1][0] = math.NaN() },
		"history":    func(r *Result) { r.History[1].Chi2 = math.Inf(1) },
		"folded":     func(r *Result) { r.Folded[0] = math.Inf(-1) },
	} {
		t.Run(name, func(t *testing.T) {
			r, err := FromUnfold(kernelResult())
			if err != nil {
				t.Fatal(err)
			}
			spoil(r)
			dir := filepath.Join(t.TempDir(), "run")
			f, err := New(dir, false)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Abort()
			if _, err := Write(f, r, nil, DefaultFormats()); err == nil || !strings.Contains(err.Error(), name) {
				t.Errorf("Write = %v, want an error naming %s", err, name)
			}
			if err := f.Commit(); err != nil {
				t.Fatal(err)
			}
			if got, _ := os.ReadDir(dir); len(got) != 0 {
				t.Errorf("files written: %v", got)
			}
		})
	}
	r, err := FromUnfold(kernelResult())
	if err != nil {
		t.Fatal(err)
	}
	ax, _ := binning.NewAxis("x", "", []float64{0, 1}, false, false)
	reg, _ := binning.NewRegion("all", ax)
	s, _ := binning.NewScheme(reg)
	if err := WriteCSV(&bytes.Buffer{}, r, s); err == nil {
		t.Error("WriteCSV accepted a 1-bin binning for a 3-bin result")
	}
}

// chain is a neighbourhood of no bins, enough for settings that only
// need one given.
type chain struct{}

func (chain) Len() int                       { return 0 }
func (chain) InRange() int                   { return 0 }
func (chain) Neighbours(int, int) (int, int) { return -1, -1 }
