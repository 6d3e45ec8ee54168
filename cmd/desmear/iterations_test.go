package main

import (
	"context"
	"path/filepath"
	"strconv"
	"testing"

	"github.com/desmear/desmear/unfold/result"
)

// TestIterationScanPlain: the "iterations" format writes the iteration
// scan in plain-table mode (the analysis mode is tested on the demo in
// TestValidateDemo); the row
// of the last iteration holds the result's own history step and
// estimate (the library's test compares every row with separate runs).
func TestIterationScanPlain(t *testing.T) {
	ctx := context.Background()
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(t.TempDir(), "plain")
	if code, stdout, stderr := runCLI(t, ctx, append(oracleDArgs(dir, out), "--iterations", "5", "--covariance", "diag", "--formats", "json,iterations")...); code != 0 {
		t.Fatalf("exit %d\n%s\n%s", code, stdout, stderr)
	}
	checkIterationTables(t, out, 5)

}

func checkIterationTables(t *testing.T, dir string, k int) {
	t.Helper()
	r, _ := readResult(t, dir)
	rows := readCSV(t, filepath.Join(dir, result.IterationsFile))
	bins := readCSV(t, filepath.Join(dir, result.IterationsBinsFile))
	if len(rows) != k+2 || rows[0][0] != "k" || rows[k+1][0] != strconv.Itoa(k) {
		t.Fatalf("%s: %v", result.IterationsFile, rows)
	}
	if v, _ := strconv.ParseFloat(rows[k+1][1], 64); v != r.History[k].Chi2 {
		t.Errorf("last row chi2 %v, history %v", v, r.History[k].Chi2)
	}
	n := len(r.Estimate)
	if len(bins) != 1+(k+1)*n {
		t.Fatalf("%s: %d rows", result.IterationsBinsFile, len(bins))
	}
	for j := range n {
		b := bins[1+k*n+j]
		e, _ := strconv.ParseFloat(b[3], 64)
		v, _ := strconv.ParseFloat(b[4], 64)
		if e != r.Estimate[j] || b[4] == "" || v <= 0 {
			t.Errorf("bin %d of the last iteration: %v, result %v ± %v", j, b, r.Estimate[j], r.Uncertainty[j])
		}
	}
}
