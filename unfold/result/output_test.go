package result

import (
	"bytes"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"gonum.org/v1/gonum/mat"
)

// entries lists the names in dir, hidden ones included.
func entries(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

func TestCommit(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	f, err := New(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if err := f.WriteFile("a.txt", []byte("alpha\n")); err != nil {
		t.Fatal(err)
	}
	w, err := f.Create("tables/region0.csv")
	if err != nil {
		t.Fatal(err)
	}
	w.WriteString("x\n") // left open: Commit closes it
	p, err := f.Reserve("hist/h.bin")
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(p, []byte{1, 2, 3}, 0o666); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(dir); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("final folder exists before Commit: %v", err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"run"}) {
		t.Errorf("parent holds %v, want only run", got)
	}
	for name, want := range map[string]string{"a.txt": "alpha\n", "tables/region0.csv": "x\n", "hist/h.bin": "\x01\x02\x03"} {
		got, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil || string(got) != want {
			t.Errorf("%s = %q, %v; want %q", name, got, err, want)
		}
	}
	fi, err := os.Stat(dir)
	if err != nil || fi.Mode().Perm() != 0o755 {
		t.Errorf("folder mode %v, %v; want 0755", fi.Mode(), err)
	}
	if err := f.Abort(); err != nil {
		t.Errorf("Abort after Commit: %v", err)
	}
	if _, err := os.Stat(dir); err != nil {
		t.Errorf("Abort after Commit removed the result: %v", err)
	}
	if err := f.WriteFile("late.txt", nil); err == nil {
		t.Error("WriteFile after Commit succeeded")
	}
}

func TestAbortLeavesNothing(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "new", "deeper", "run")
	f, err := New(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	if err := f.WriteJSON("result.json", map[string]int{"a": 1}); err != nil {
		t.Fatal(err)
	}
	w, _ := f.Create("open.csv")
	w.WriteString("partial")
	if err := f.Abort(); err != nil {
		t.Fatal(err)
	}
	if got := entries(t, parent); len(got) != 0 {
		t.Errorf("after Abort the parent holds %v, want nothing (created parents removed too)", got)
	}
	if err := f.Commit(); err == nil {
		t.Error("Commit after Abort succeeded")
	}
}

func TestExisting(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	if err := os.Mkdir(dir, 0o777); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("mine"), 0o666); err != nil {
		t.Fatal(err)
	}
	if _, err := New(dir, false); !errors.Is(err, ErrExists) {
		t.Errorf("New on an existing folder: %v, want ErrExists", err)
	}
	// Not a result folder: refused even with replace.
	if _, err := New(dir, true); !errors.Is(err, ErrNotResult) {
		t.Errorf("New(replace) on a foreign folder: %v, want ErrNotResult", err)
	}
	file := filepath.Join(parent, "file")
	os.WriteFile(file, nil, 0o666)
	if err := Check(file, true); !errors.Is(err, ErrNotResult) {
		t.Errorf("Check(replace) on a file: %v, want ErrNotResult", err)
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"file", "run"}) {
		t.Errorf("refusals left %v", got)
	}

	// A folder appearing while the result is written is not overwritten.
	late := filepath.Join(parent, "late")
	f, err := New(late, false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	f.WriteFile("result.json", []byte("{}"))
	os.Mkdir(late, 0o777)
	if err := f.Commit(); !errors.Is(err, ErrExists) {
		t.Errorf("Commit onto a folder created meanwhile: %v, want ErrExists", err)
	}
	f.Abort()
	if got := entries(t, late); len(got) != 0 {
		t.Errorf("the folder created meanwhile now holds %v", got)
	}
}

func TestReplace(t *testing.T) { bothWays(t, testReplace) }

// bothWays runs test with the atomic exchange of folders and again with
// the fallback (rename aside) used where the system has none.
func bothWays(t *testing.T, test func(*testing.T)) {
	t.Run("exchange", test)
	t.Run("fallback", func(t *testing.T) {
		noExchange = true
		defer func() { noExchange = false }()
		test(t)
	})
}

func testReplace(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "run")
	for k, content := range []string{`{"n":1}`, `{"n":2}`} {
		f, err := New(dir, k > 0)
		if err != nil {
			t.Fatal(err)
		}
		if k == 0 {
			f.WriteFile("old-only.txt", nil)
		}
		f.WriteFile(JSONFile, []byte(content))
		if err := f.Commit(); err != nil {
			t.Fatal(err)
		}
	}
	got, _ := os.ReadFile(filepath.Join(dir, JSONFile))
	if string(got) != `{"n":2}` {
		t.Errorf("result.json = %s after replacing", got)
	}
	if _, err := os.Stat(filepath.Join(dir, "old-only.txt")); !errors.Is(err, os.ErrNotExist) {
		t.Error("a file of the replaced result survived")
	}
	if got := entries(t, parent); !slices.Equal(got, []string{"run"}) {
		t.Errorf("parent holds %v after replacing, want only run", got)
	}
	// An empty folder may be replaced too.
	empty := filepath.Join(parent, "empty")
	os.Mkdir(empty, 0o777)
	if err := Check(empty, true); err != nil {
		t.Errorf("Check(replace) on an empty folder: %v", err)
	}
}

func TestNames(t *testing.T) {
	f, err := New(filepath.Join(t.TempDir(), "run"), false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	for _, bad := range []string{"", ".", "../x", "/abs", "a/../b", `a\b`} {
		if _, err := f.Create(bad); err == nil {
			t.Errorf("Create(%q) succeeded", bad)
		}
	}
	if _, err := f.Create("a/b.csv"); err != nil {
		t.Fatal(err)
	}
	for _, clash := range []string{"a/b.csv", "a", "a/b.csv/c"} {
		if _, err := f.Create(clash); err == nil {
			t.Errorf("Create(%q) after a/b.csv succeeded", clash)
		}
	}
	p, _ := f.Reserve("never.root")
	_ = p
	if err := f.Commit(); err == nil || !strings.Contains(err.Error(), "reserved but not written") {
		t.Errorf("Commit with a reserved file missing: %v", err)
	}
	if _, err := New(".", false); err == nil {
		t.Error(`New(".") succeeded`)
	}
}

func TestWriteJSONRefusesNaN(t *testing.T) {
	f, err := New(filepath.Join(t.TempDir(), "run"), false)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Abort()
	if err := f.WriteJSON("x.json", []float64{math.NaN()}); err == nil {
		t.Error("WriteJSON wrote a NaN")
	}
}

// SHA-256 of "abc": the FIPS 180-2 test vector (NIST, Secure Hash
// Standard, 2002, appendix B.1).
func TestHashingReader(t *testing.T) {
	h := NewHashingReader(strings.NewReader("abc"))
	buf := make([]byte, 1)
	h.Read(buf) // a parser that stops early: Input reads the rest
	in, err := h.Input("data", "n.csv")
	if err != nil {
		t.Fatal(err)
	}
	if in.SHA256 != "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad" || in.Bytes != 3 {
		t.Errorf("got %+v", in)
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

// WriteResult refuses a result holding a NaN or an infinity anywhere
// (JSON has no such numbers) and leaves no file in the folder; WriteCSV
// refuses a truth binning of another size.
func TestWriteResultRefuses(t *testing.T) {
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
			if err := f.WriteResult(r, nil); err == nil || !strings.Contains(err.Error(), name) {
				t.Errorf("WriteResult = %v, want an error naming %s", err, name)
			}
			if got := entries(t, f.tmp); len(got) != 0 {
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
