package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/result"
)

// unfold --no-report writes no plots and no page; desmear report adds
// them later and leaves every other file as it was.
func TestReportCommand(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(dir, "out")
	ctx := context.Background()
	if code, _, stderr := runCLI(t, ctx, append(oracleDArgs(dir, out), "--no-report")...); code != 0 {
		t.Fatalf("unfold --no-report: exit %d\n%s", code, stderr)
	}
	names := dirNames(t, out)
	for _, n := range names {
		if n == result.PlotsFolder || n == result.ReportFile {
			t.Errorf("--no-report wrote %s", n)
		}
	}
	before, err := os.ReadFile(filepath.Join(out, result.JSONFile))
	if err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := runCLI(t, ctx, "report", out)
	if code != 0 || !strings.Contains(stdout, filepath.Join(out, result.ReportFile)) {
		t.Fatalf("report: exit %d\n%s%s", code, stdout, stderr)
	}
	for _, f := range []string{result.ReportFile, result.PlotFile("folded", "png"), result.PlotFile("response", "svg")} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Error(err)
		}
	}
	after, _ := os.ReadFile(filepath.Join(out, result.JSONFile))
	if !bytes.Equal(before, after) {
		t.Error("report changed result.json")
	}
	if got := strings.Join(dirNames(t, out), " "); got != strings.Join(names, " ")+" plots report.html" && !strings.Contains(got, "report.html") {
		t.Errorf("files after report: %s", got)
	}
	if code, _, stderr := runCLI(t, ctx, "report", filepath.Join(dir, "missing")); code != exitInput {
		t.Errorf("report of a missing folder: exit %d %s", code, stderr)
	}
}
