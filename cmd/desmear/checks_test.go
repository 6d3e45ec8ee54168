package main

import (
	"context"
	"os"
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

// The summary of an analysis with derived quantities names their
// tables.
func TestDerivedSummary(t *testing.T) {
	path := writeCLIAnalysis(t)
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(src), "  folder: result\n", "  folder: result\n  derived:\n    - {name: pt, region: central, kind: shape, per_slice: [y]}\n", 1)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := runCLI(t, context.Background(), "unfold", path, "--no-report")
	if code != 0 {
		t.Fatalf("exit %d\n%s", code, stderr)
	}
	want := "derived: " + filepath.Join(filepath.Dir(path), "result", "derived-pt.csv") + "\n"
	if !strings.Contains(stdout, want) {
		t.Errorf("stdout lacks %q:\n%s", want, stdout)
	}
}
