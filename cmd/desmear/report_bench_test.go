package main

import (
	"context"
	"path/filepath"
	"testing"

	"github.com/desmear/desmear/unfold/result"
)

// BenchmarkReportDemo measures writing the demo's report (every plot as
// PNG and SVG, and report.html) into its result folder, as "desmear
// report" does: go test -run XXX -bench ReportDemo ./cmd/desmear
func BenchmarkReportDemo(b *testing.B) {
	dir := b.TempDir()
	if code, _, stderr := runCLI(b, context.Background(), "demo", "--out", filepath.Join(dir, "demo"), "--no-report"); code != 0 {
		b.Fatalf("demo: exit %d\n%s", code, stderr)
	}
	out := filepath.Join(dir, "demo", "result")
	r, err := result.Read(out)
	if err != nil {
		b.Fatal(err)
	}
	truth, err := reportTruth(r, "")
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for b.Loop() {
		if _, err := result.ReplaceReport(out, r, truth); err != nil {
			b.Fatal(err)
		}
	}
}
