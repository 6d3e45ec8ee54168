package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/validate"
)

func readValidation(t *testing.T, dir string) *validate.Report {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, validate.JSONFile))
	if err != nil {
		t.Fatal(err)
	}
	var r validate.Report
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

// TestValidateDemo: on the demo, the closure test without fluctuations
// returns the simulation truth to rounding (the simulation's prior starts
// the iteration at its fixed point, method.md §7 Exact properties of the
// iteration); the folder holds the scan, the recommendation and one
// stress test per truth axis.
func TestValidateDemo(t *testing.T) {
	ctx := context.Background()
	dir := filepath.Join(t.TempDir(), "zeton")
	if code, stdout, stderr := runCLI(t, ctx, "demo", "--out", dir, "--events", demoTestEvents, "--seed", "3"); code != 0 {
		t.Fatalf("demo: exit %d\n%s\n%s", code, stdout, stderr)
	}
	out := filepath.Join(dir, "validation")
	code, stdout, stderr := runCLI(t, ctx, "validate", filepath.Join(dir, "analysis.yaml"), "--out", out, "--toys", "60", "--max-iterations", "3")
	if code != 0 {
		t.Fatalf("validate: exit %d\n%s\n%s", code, stdout, stderr)
	}
	r := readValidation(t, out)
	if len(r.Scan) != 3 || r.Recommended < 1 || r.Recommended > 3 || r.Toys != 60 {
		t.Errorf("scan of %d points, recommended %d, %d toys", len(r.Scan), r.Recommended, r.Toys)
	}
	if c := r.Closure[0]; c.Fluctuated || c.MaxRelDeviation > 1e-9 {
		t.Errorf("closure without fluctuations: largest relative deviation %v", c.MaxRelDeviation)
	}
	// Σ pull² of ndf bins: mean ndf, spread about sqrt(2 ndf) (common
	// practice; the bins are correlated, so within 4 of those).
	if c := r.Closure[1]; !c.Fluctuated || math.Abs(c.Chi2-float64(c.NDF)) > 4*math.Sqrt(2*float64(c.NDF)) {
		t.Errorf("fluctuated closure: chi2 %v for %d bins", c.Chi2, c.NDF)
	}
	// The pulls of the fluctuated closure: mean 0 and width 1 within 4
	// of their precisions 1/sqrt(n) and 1/sqrt(2(n−1)) over the n bins
	// (common practice; the bins are correlated, hence the margin).
	{
		c := r.Closure[1]
		var s, s2, n float64
		for j, d := range r.Determined {
			if d && c.Uncertainty[j] > 0 {
				s, s2, n = s+c.Pull[j], s2+c.Pull[j]*c.Pull[j], n+1
			}
		}
		mean := s / n
		width := math.Sqrt((s2 - n*mean*mean) / (n - 1))
		if math.Abs(mean) > 4/math.Sqrt(n) || math.Abs(width-1) > 4/math.Sqrt(2*(n-1)) {
			t.Errorf("fluctuated closure pulls: mean %v, width %v over %v bins", mean, width, n)
		}
	}
	if len(r.Stress) != 2 || !strings.HasPrefix(r.Stress[0].Name, "tilt-y") || r.Stress[0].Nominal == nil {
		t.Errorf("stress tests %+v", r.Stress)
	}
	for _, want := range []string{"recommended iterations:", "closure: chi2/ndf", "tilt-pt"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("stdout lacks %q:\n%s", want, stdout)
		}
	}
	for _, f := range validate.Files() {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Error(err)
		}
	}
	// iterations: auto in the analysis file chooses the count of the
	// smallest recorded curve value and records the choice.
	src, err := os.ReadFile(filepath.Join(dir, "analysis.yaml"))
	if err != nil {
		t.Fatal(err)
	}
	auto := strings.Replace(strings.Replace(string(src), "iterations: 4", "iterations: auto", 1), "folder: result", "folder: result-auto", 1)
	if auto == string(src) {
		t.Fatal("the demo's analysis file has no \"iterations: 4\"")
	}
	autoFile := filepath.Join(dir, "auto.yaml")
	writeFiles(t, dir, map[string]string{"auto.yaml": auto})
	if code, stdout, stderr := runCLI(t, ctx, "unfold", autoFile); code != 0 {
		t.Fatalf("iterations: auto: exit %d\n%s\n%s", code, stdout, stderr)
	}
	res, _ := readResult(t, filepath.Join(dir, "result-auto"))
	if ch := res.Settings.IterationsChosen; ch == nil || ch.Criterion != validate.MinMSE || res.Settings.Iterations != argmin(ch.Curve)+1 {
		t.Errorf("iterations %d, choice %+v", res.Settings.Iterations, ch)
	}
	// The iteration scan from an analysis file (the demo's full
	// covariance: the variances of every iteration are the diagonals of
	// the Jacobian recursion).
	scan := strings.Replace(string(src), "folder: result", "folder: result-scan\n  formats: [json, iterations]", 1)
	writeFiles(t, dir, map[string]string{"scan.yaml": scan})
	if code, stdout, stderr := runCLI(t, ctx, "unfold", filepath.Join(dir, "scan.yaml")); code != 0 {
		t.Fatalf("iteration scan: exit %d\n%s\n%s", code, stdout, stderr)
	}
	checkIterationTables(t, filepath.Join(dir, "result-scan"), 4)
	writeFiles(t, dir, map[string]string{"bad.yaml": strings.Replace(auto, "iterations: auto", "iterations: auto\n  stop_chi2: 0.5", 1)})
	if code, _, stderr := runCLI(t, ctx, "unfold", filepath.Join(dir, "bad.yaml")); code == 0 || !strings.Contains(stderr, "unfolding.iterations") {
		t.Errorf("auto with stop_chi2: exit %d, %s", code, stderr)
	}
	// Toy truths and a stress test of the analysis file.
	stress := string(src) + "\nvalidation:\n  stress:\n    - name: harder-pt\n      weight: \"1 + 0.01*(pt - 40)\"\n"
	writeFiles(t, dir, map[string]string{"stress.yaml": stress})
	for _, c := range []struct{ truth, source string }{{"result", "result"}, {"harder-pt", "harder-pt"}, {"tilt-y", "tilt-y-+20%"}} {
		o := filepath.Join(dir, "v-"+c.truth)
		if code, stdout, stderr := runCLI(t, ctx, "validate", filepath.Join(dir, "stress.yaml"), "--out", o, "--toys", "4", "--max-iterations", "1", "--toy-truth", c.truth); code != 0 {
			t.Fatalf("--toy-truth %s: exit %d\n%s\n%s", c.truth, code, stdout, stderr)
		}
		v := readValidation(t, o)
		names := []string{}
		for _, st := range v.Stress {
			names = append(names, st.Name)
		}
		if v.TruthSource != c.source || !slices.Equal(names, []string{"harder-pt", "tilt-y-+20%", "tilt-pt-+20%"}) {
			t.Errorf("--toy-truth %s: truth %s, stress tests %v", c.truth, v.TruthSource, names)
		}
		if c.truth == "result" && !slices.Equal(v.Truth, v.Nominal.Estimate) {
			t.Errorf("the result as toy truth %v, the nominal result %v", v.Truth, v.Nominal.Estimate)
		}
	}
	for _, bad := range [][]string{{"--toy-truth", "softer"}, {"--toy-truth", "tilt-eta"}, {"--toy-truth", "result", "--truth", "T.csv"}} {
		if code, _, stderr := runCLI(t, ctx, append([]string{"validate", filepath.Join(dir, "stress.yaml"), "--out", filepath.Join(dir, "v-bad")}, bad...)...); code != exitUsage || !strings.Contains(stderr, "truth") {
			t.Errorf("%v: exit %d, %s", bad, code, stderr)
		}
	}
	// An existing folder is refused without --force.
	if code, _, stderr := runCLI(t, ctx, "validate", filepath.Join(dir, "analysis.yaml"), "--out", out, "--toys", "4", "--max-iterations", "1"); code != exitUsage || !strings.Contains(stderr, "--force") {
		t.Errorf("existing folder: exit %d, %s", code, stderr)
	}
	// The settings come from the analysis file.
	if code, _, stderr := runCLI(t, ctx, "validate", filepath.Join(dir, "analysis.yaml"), "--out", out+"2", "--iterations", "3"); code != exitUsage || !strings.Contains(stderr, "--iterations") {
		t.Errorf("--iterations with an analysis file: exit %d, %s", code, stderr)
	}
}

// TestValidatePlain: plain-table mode with a toy truth table, the same
// bits with one core and with two, and the usage errors.
func TestValidatePlain(t *testing.T) {
	files := map[string]string{"T.csv": "truth,value\n0,1200\n1,800\n2,400\n"}
	for k, v := range oracleD {
		files[k] = v
	}
	dir := writeFiles(t, t.TempDir(), files)
	args := func(out string) []string {
		return []string{"validate", "--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
			"--data", filepath.Join(dir, "n.csv"), "--prior", filepath.Join(dir, "p.csv"), "--truth", filepath.Join(dir, "T.csv"),
			"--toys", "100", "--max-iterations", "6", "--seed", "4", "--out", out}
	}
	ctx := context.Background()
	var docs [2][]byte
	for i, procs := range []int{1, 2} {
		prev := runtime.GOMAXPROCS(procs)
		out := filepath.Join(t.TempDir(), "v")
		code, stdout, stderr := runCLI(t, ctx, args(out)...)
		runtime.GOMAXPROCS(prev)
		if code != 0 {
			t.Fatalf("exit %d\n%s\n%s", code, stdout, stderr)
		}
		b, err := os.ReadFile(filepath.Join(out, validate.JSONFile))
		if err != nil {
			t.Fatal(err)
		}
		docs[i] = b
		r := readValidation(t, out)
		if r.TruthSource != filepath.Join(dir, "T.csv") || r.Truth[0] != 1200 {
			t.Errorf("toy truth %s %v", r.TruthSource, r.Truth)
		}
	}
	if !bytes.Equal(docs[0], docs[1]) {
		t.Error("validation.json differs between 1 and 2 cores")
	}
	if code, _, stderr := runCLI(t, ctx, "validate", "--response", filepath.Join(dir, "A.csv"), "--out", filepath.Join(t.TempDir(), "x")); code != exitUsage || !strings.Contains(stderr, "--generated") {
		t.Errorf("missing tables: exit %d, %s", code, stderr)
	}
	if code, _, stderr := runCLI(t, ctx, append(args(filepath.Join(t.TempDir(), "y")), "--toys", "1")...); code != exitUsage || !strings.Contains(stderr, "--toys") {
		t.Errorf("--toys 1: exit %d, %s", code, stderr)
	}
	if code, _, stderr := runCLI(t, ctx, append(args(filepath.Join(t.TempDir(), "z")), "--criterion", "best")...); code != exitUsage {
		t.Errorf("--criterion best: exit %d, %s", code, stderr)
	}
}

// TestUnfoldIterationsAuto: --iterations auto unfolds with the count the
// toy scan recommends (the smallest of its recorded curve) and records
// the criterion; the estimate is that of a fixed run with that count.
func TestUnfoldIterationsAuto(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	ctx := context.Background()
	auto := filepath.Join(t.TempDir(), "auto")
	args := oracleDArgs(dir, auto)
	if code, stdout, stderr := runCLI(t, ctx, append(args, "--iterations", "auto", "--seed", "9")...); code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, stdout, stderr)
	}
	r, _ := readResult(t, auto)
	ch := r.Settings.IterationsChosen
	if ch == nil || ch.Criterion != validate.MinMSE || len(ch.Curve) != validate.DefaultMaxK || ch.Seed != 9 {
		t.Fatalf("iterations_chosen %+v", ch)
	}
	best := argmin(ch.Curve)
	if r.Settings.Iterations != best+1 {
		t.Errorf("iterations %d, the curve is smallest at %d", r.Settings.Iterations, best+1)
	}
	fixed := filepath.Join(t.TempDir(), "fixed")
	if code, _, stderr := runCLI(t, ctx, append(oracleDArgs(dir, fixed), "--iterations", strconv.Itoa(best+1))...); code != 0 {
		t.Fatal(stderr)
	}
	f, _ := readResult(t, fixed)
	if !slices.Equal(f.Estimate, r.Estimate) || f.Settings.IterationsChosen != nil {
		t.Errorf("auto estimate %v, fixed %v", r.Estimate, f.Estimate)
	}
	if code, _, stderr := runCLI(t, ctx, append(oracleDArgs(dir, filepath.Join(t.TempDir(), "x")), "--iterations", "often")...); code != exitUsage || !strings.Contains(stderr, "auto") {
		t.Errorf("--iterations often: exit %d, %s", code, stderr)
	}
}

// argmin returns the index of the first smallest value.
func argmin(v []float64) int {
	best := 0
	for k, x := range v {
		if x < v[best] {
			best = k
		}
	}
	return best
}

// TestToyOptionsRefused: "desmear validate" and the plan of a toy
// ensemble refuse the same impossible toy options with the same message,
// before any file is read, and accept the edges of what can be run.
func TestToyOptionsRefused(t *testing.T) {
	ctx := context.Background()
	dir := t.TempDir()
	an := filepath.Join(dir, "none.yaml") // never read: the options are refused first
	for _, c := range []struct {
		args []string
		want string
	}{
		// A sample variance needs two toys: C/(N − 1) of method.md §17
		// Ensembles: running means and covariances that merge.
		{[]string{"--toys", "1"}, "--toys 1: give at least 2"},
		// The scan runs 1..K iterations (method.md §3 The iteration).
		{[]string{"--max-iterations", "0"}, "--max-iterations 0: give at least 1"},
		// The tilt's weights run from 1 − percent/100 to 1 + percent/100
		// (the weights of Tilt): 100 percent makes a weight 0.
		{[]string{"--tilt", "100"}, "--tilt 100: give a size in [0, 100) percent"},
		{[]string{"--tilt", "-1"}, "--tilt -1: give a size in [0, 100) percent"},
		{[]string{"--tilt", "NaN"}, "--tilt NaN: give a size in [0, 100) percent"},
		// |bias|/σ below a threshold that is not positive is never met
		// (the bias_below criterion of "desmear help validation").
		{[]string{"--bias-threshold", "0"}, "--bias-threshold 0: give a number > 0"},
		{[]string{"--bias-threshold", "NaN"}, "--bias-threshold NaN: give a number > 0"},
	} {
		vargs := append([]string{"validate", an, "--out", filepath.Join(dir, "v")}, c.args...)
		vcode, _, verr := runCLI(t, ctx, vargs...)
		pargs := append([]string{"batch", "plan", an, "--toys", "100", "--shards", "1", "--workdir", filepath.Join(dir, "w")}, c.args...)
		pcode, _, perr := runCLI(t, ctx, pargs...)
		if vcode != exitUsage || pcode != exitUsage {
			t.Errorf("%v: exit %d (validate), %d (batch plan), want %d", c.args, vcode, pcode, exitUsage)
		}
		if !strings.Contains(verr, c.want) || verr != perr {
			t.Errorf("%v: validate says %q, batch plan %q, want both %q", c.args, verr, perr, c.want)
		}
	}
	// The edges that can be run (the same sources as above).
	for _, o := range []validateOptions{
		{toys: 2, maxK: 1, tilt: 0, threshold: math.SmallestNonzeroFloat64},
		{toys: 2, maxK: 1, tilt: math.Nextafter(100, 0), threshold: 0.2},
	} {
		if err := o.checkToys(); err != nil {
			t.Errorf("%+v: %v", o, err)
		}
	}
}

// TestWriteValidationRefuses: the validation folder replaces an earlier
// validation folder only with --force, and never another folder (the
// folder rule of "desmear help validation"), before anything is written;
// "desmear validate" and the merge of a toy plan write through
// writeValidation.
func TestWriteValidationRefuses(t *testing.T) {
	dir := t.TempDir()
	earlier, foreign := filepath.Join(dir, "earlier"), filepath.Join(dir, "foreign")
	for _, f := range []string{filepath.Join(earlier, validate.JSONFile), filepath.Join(foreign, "notes.txt")} {
		if err := os.MkdirAll(filepath.Dir(f), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(f, []byte("{}\n"), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	for _, c := range []struct {
		out   string
		force bool
		want  string
	}{
		{earlier, false, "validation folder " + earlier + " exists (use --force to replace it, or choose another folder)"},
		{foreign, true, foreign + " exists and is not an earlier validation folder (it does not hold a " + validate.JSONFile + "); refusing to replace it even with --force"},
	} {
		// The report is never read: the folder is refused first.
		err := writeValidation(c.out, c.force, &validate.Report{})
		if err == nil || exitCode(context.Background(), err) != exitUsage || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s (force %v): %v, want a usage error %q", c.out, c.force, err, c.want)
		}
	}
	for _, f := range []string{filepath.Join(earlier, validate.JSONFile), filepath.Join(foreign, "notes.txt")} {
		if b, err := os.ReadFile(f); err != nil || string(b) != "{}\n" {
			t.Errorf("%s was touched: %q, %v", f, b, err)
		}
	}
}
