package main

import (
	"context"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result"
)

// --compare in plain-table mode: the pulls and the chi-square of result.json
// against a reference, checked with gonum's dense LU solve of the stored
// covariance (full rank here, so the pseudo-inverse of method.md §19
// Comparison with a reference spectrum is the inverse and ndf = 3), and
// comparison.csv beside result.csv.
func TestUnfoldCompare(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), maps(oracleD, map[string]string{"ref.csv": "# reference\ntruth,value\n0,1000\n1,1000\n2,1000\n"}))
	out := filepath.Join(dir, "out")
	args := append(oracleDArgs(dir, out), "--covariance", "full", "--compare", filepath.Join(dir, "ref.csv"))
	code, stdout, stderr := runCLI(t, context.Background(), args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	c := r.Comparison
	if c == nil || len(c.Bins) != 3 || c.Covariance != "total" || c.NDF != 3 || c.Determined != 3 || c.Condition == nil {
		t.Fatalf("comparison %+v", c)
	}
	v := mat.NewDense(3, 3, nil)
	d := mat.NewVecDense(3, nil)
	for i := range 3 {
		d.SetVec(i, r.Estimate[i]-1000)
		for j := range 3 {
			v.Set(i, j, r.Covariance[i][j])
		}
		if p := (r.Estimate[i] - 1000) / r.Uncertainty[i]; math.Abs(*c.Pull[i]-p) > 1e-12*math.Abs(p) {
			t.Errorf("bin %d: pull %v, want %v", i, *c.Pull[i], p)
		}
	}
	var x mat.VecDense
	if err := x.SolveVec(v, d); err != nil {
		t.Fatal(err)
	}
	if want := mat.Dot(d, &x); math.Abs(c.Chi2-want) > 1e-8*want {
		t.Errorf("chi2 %v, want %v (LU solve)", c.Chi2, want)
	}
	rows := readCSV(t, filepath.Join(out, "comparison.csv"))
	if len(rows) != 4 || strings.Join(rows[0], ",") != "index,reference,estimate,uncertainty,pull,determined" {
		t.Errorf("comparison.csv: %v", rows)
	}
	if !strings.Contains(stdout, "comparison with ") || !strings.Contains(stdout, "through its pseudo-inverse") || !strings.Contains(stdout, "3 of 3 directions kept") {
		t.Errorf("stdout does not print the comparison:\n%s", stdout)
	}

	// Without --covariance full the chi-square is the diagonal one, and
	// says so.
	out2 := filepath.Join(dir, "out2")
	code, stdout, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, out2), "--compare", filepath.Join(dir, "ref.csv"))...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if r, _ := readResult(t, out2); r.Comparison.Covariance != "diagonal" || !strings.Contains(stdout, "correlations ignored") {
		t.Errorf("diagonal comparison: %+v\n%s", r.Comparison, stdout)
	}

	// A bad reference table: exit 3 with the file and the line.
	os.WriteFile(filepath.Join(dir, "bad.csv"), []byte("truth,value\n0,1000\n7,5\n"), 0o644)
	code, _, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, filepath.Join(dir, "out3")), "--compare", filepath.Join(dir, "bad.csv"))...)
	if code != exitInput || !strings.Contains(stderr, "bad.csv:3") {
		t.Errorf("bad reference: exit %d, stderr %q", code, stderr)
	}
}

// The key compare of an analysis file: the comparison is in result.json,
// comparison.csv and on stdout; a reference table that does not exist is
// refused naming it.
func TestAnalysisCompare(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	src, _ := os.ReadFile(path)
	var ref strings.Builder
	ref.WriteString("truth,value\n")
	for j := range 8 {
		ref.WriteString(strconv.Itoa(j) + ",500\n")
	}
	os.WriteFile(filepath.Join(dir, "ref.csv"), []byte(ref.String()), 0o644)
	os.WriteFile(filepath.Join(dir, "cmp.yaml"), append(src, []byte("compare: ref.csv\n")...), 0o644)
	code, stdout, stderr := runCLI(t, context.Background(), "unfold", filepath.Join(dir, "cmp.yaml"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, filepath.Join(dir, "result"))
	if r.Comparison == nil || r.Comparison.Reference != filepath.Join(dir, "ref.csv") || r.Comparison.NDF == 0 {
		t.Fatalf("comparison %+v", r.Comparison)
	}
	if _, err := os.Stat(filepath.Join(dir, "result", "comparison.csv")); err != nil {
		t.Error(err)
	}
	if !strings.Contains(stdout, "chi2/ndf") {
		t.Errorf("stdout:\n%s", stdout)
	}
	os.WriteFile(filepath.Join(dir, "cmp2.yaml"), append(src, []byte("compare: nowhere.csv\n")...), 0o644)
	os.RemoveAll(filepath.Join(dir, "result"))
	code, _, stderr = runCLI(t, context.Background(), "unfold", filepath.Join(dir, "cmp2.yaml"))
	if code != exitInput || !strings.Contains(stderr, "nowhere.csv") {
		t.Errorf("missing reference: exit %d, stderr %q", code, stderr)
	}
}

// --bias-toys: the bias estimate beside the uncertainty in result.csv
// (bias, bias_error) and in result.json (bias, with its toys and seed);
// 1 toy is refused at the flag, and uncertainty.bias_toys: 1 at its line.
// The numbers are checked in unfold/validate (method.md §23).
func TestUnfoldBiasToys(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(dir, "out")
	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--bias-toys", "50")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	if r.Bias == nil || r.Bias.Toys != 50 || len(r.Bias.Values) != 3 || len(r.Bias.Error) != 3 || r.Settings.BiasToys != 50 {
		t.Fatalf("bias %+v, settings %+v", r.Bias, r.Settings)
	}
	for j, e := range r.Bias.Error {
		if !(e > 0) {
			t.Errorf("bin %d: bias error %v", j, e)
		}
	}
	rows := readCSV(t, filepath.Join(out, "result.csv"))
	if h := strings.Join(rows[0], ","); !strings.Contains(h, "uncertainty,bias,bias_error,") {
		t.Errorf("result.csv header %s", h)
	}
	code, _, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, filepath.Join(dir, "out2")), "--bias-toys", "1")...)
	if code != exitUsage || !strings.Contains(stderr, "--bias-toys 1") {
		t.Errorf("--bias-toys 1: exit %d, stderr %q", code, stderr)
	}
	path := writeCLIAnalysis(t)
	src, _ := os.ReadFile(path)
	bad := strings.Replace(string(src), "uncertainty:\n", "uncertainty:\n  bias_toys: 1\n", 1)
	if bad == string(src) {
		t.Fatal("the test analysis has no uncertainty section")
	}
	os.WriteFile(path, []byte(bad), 0o644)
	code, _, stderr = runCLI(t, context.Background(), "unfold", path)
	if code != exitInput || !strings.Contains(stderr, "uncertainty.bias_toys: must be 0") {
		t.Errorf("bias_toys: 1: exit %d, stderr %q", code, stderr)
	}
}

// --variance-from and uncertainty.variance_from: the choice is recorded in
// settings; a bad value is refused at the flag and at the key's line.
// The numbers are checked in unfold/methods/bayes (method.md §24).
func TestVarianceFromSetting(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(dir, "out")
	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--variance-from", "expectation")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if r, _ := readResult(t, out); r.Settings.VarianceFrom != "expectation" {
		t.Errorf("settings %+v", r.Settings)
	}
	code, _, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, filepath.Join(dir, "o2")), "--variance-from", "nope")...)
	if code != exitUsage || !strings.Contains(stderr, "variance-from") {
		t.Errorf("--variance-from nope: exit %d, stderr %q", code, stderr)
	}
	path := writeCLIAnalysis(t)
	src, _ := os.ReadFile(path)
	lines := strings.Split(string(src), "\n")
	at := 0
	for k, l := range lines {
		if l == "uncertainty:" {
			at = k + 2 // the line of the new key
		}
	}
	os.WriteFile(path, []byte(strings.Replace(string(src), "uncertainty:\n", "uncertainty:\n  variance_from: nope\n", 1)), 0o644)
	code, _, stderr = runCLI(t, context.Background(), "unfold", path)
	if want := "analysis.yaml:" + strconv.Itoa(at) + ": uncertainty.variance_from"; code != exitInput || !strings.Contains(stderr, want) {
		t.Errorf("variance_from: nope: exit %d, stderr %q, want %q", code, stderr, want)
	}
}

// The warning on a collapsed uncertainty (method.md §24): a background
// above the data of reco bin 1 drives truth bin 1 towards zero by a
// factor n_1/b_1 = 1/2 per iteration at most (the iteration of method.md
// §3: μ₁ ← μ₁ n₁/(ε μ₁ + b₁)), so after 20 iterations it is below 1e-4 of
// its start while its linearised uncertainty, a product of those factors
// times sqrt(n₁)/n₁ per iteration, stays below sqrt(μ₁). The bin is named
// on stderr and listed in result.json; truth bin 0 is not. A truth bin
// without response entries is noted as not determined.
func TestUnfoldCollapseWarning(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), map[string]string{
		"A.csv": "reco,truth,value\n0,0,800\n1,1,800\n",
		"G.csv": "truth,value\n0,1000\n1,1000\n2,1000\n",
		"n.csv": "reco,value\n0,100\n1,5\n",
		"b.csv": "reco,value\n0,0\n1,10\n",
	})
	args := func(out string, extra ...string) []string {
		return append([]string{"unfold", "--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
			"--data", filepath.Join(dir, "n.csv"), "--out", filepath.Join(dir, out)}, extra...)
	}
	code, _, stderr := runCLI(t, context.Background(), args("out", "--background", filepath.Join(dir, "b.csv"), "--iterations", "20")...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, filepath.Join(dir, "out"))
	if len(r.CollapsedBins) != 1 || r.CollapsedBins[0] != 1 {
		t.Errorf("collapsed bins %v, want [1] (estimate %v ± %v)", r.CollapsedBins, r.Estimate, r.Uncertainty)
	}
	if !strings.Contains(stderr, "warning: in 1 truth bins") || !strings.Contains(stderr, "(bins 1)") || !strings.Contains(stderr, "--diagonal-method toys") {
		t.Errorf("stderr lacks the warning:\n%s", stderr)
	}
	if !strings.Contains(stderr, "1 truth bins have no response entries") {
		t.Errorf("stderr lacks the note on bin 2:\n%s", stderr)
	}
	code, _, stderr = runCLI(t, context.Background(), args("out2")...)
	if code != 0 || strings.Contains(stderr, "warning:") {
		t.Errorf("without the background: exit %d, stderr %s", code, stderr)
	}
}

// Both modes print the same notes through printBinNotes: an analysis
// result with a truth bin not determined and a collapsed bin gets the
// note and the warning, naming the bin by its label and the analysis
// file's way to ask for toys.
func TestBinNotesAnalysisMode(t *testing.T) {
	var stderr strings.Builder
	g := &globalOptions{stdout: io.Discard, stderr: &stderr}
	r := &result.Result{TruthBins: 3, Determined: []bool{true, true, false}, CollapsedBins: []int{1}}
	s := compareScheme(t)
	printBinNotes(g, r, s, "uncertainty.method: toys")
	got := stderr.String()
	for _, want := range []string{"1 truth bins have no response entries", "(bins 1 " + s.Label(1) + ")", "uncertainty.method: toys"} {
		if !strings.Contains(got, want) {
			t.Errorf("stderr lacks %q:\n%s", want, got)
		}
	}
	stderr.Reset()
	g.quiet = true
	printBinNotes(g, r, s, "")
	if stderr.Len() != 0 {
		t.Errorf("--quiet printed %q", stderr.String())
	}
}

func compareScheme(t *testing.T) *binning.Scheme {
	t.Helper()
	ax, err := binning.NewAxis("x", "", []float64{0, 1, 2, 3}, false, false)
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
	return s
}
