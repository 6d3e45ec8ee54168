package main

import (
	"context"
	"path/filepath"
	"strings"
	"testing"
)

// The plain-table summary ends with the checks of the result: the
// folded chi-square (the document's folded_chi2, method.md §16 Folded
// comparison), the counts of poorly measured bins and where the
// diagnostic tables are.
func TestPlainChecks(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(dir, "out")
	code, stdout, stderr := runCLI(t, context.Background(), oracleDArgs(dir, out)...)
	if code != 0 {
		t.Fatalf("exit %d\n%s", code, stderr)
	}
	r, _ := readResult(t, out)
	for _, want := range []string{
		"folded chi-square: " + formatG4(r.FoldedChi2) + " over 4 reco bins",
		"checks: 0 truth bins not determined, 0 with efficiency below 0.1, 0 reco bins clipped",
		"diagnostics: " + filepath.Join(out, "reco-bins.csv") + ", " + filepath.Join(out, "truth-bins.csv"),
	} {
		if !strings.Contains(stdout, want) {
			t.Errorf("stdout lacks %q:\n%s", want, stdout)
		}
	}
}
