package main

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
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
