package main

import (
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"strings"

	"github.com/desmear/desmear/unfold/result"
)

// printChecks prints the checks of a result document r written to dir
// (both modes, whatever the size): the folded chi-square, the truth bins
// not determined or poorly measured, the clipped reco bins and where the
// diagnostic tables and the derived quantities' tables are among files.
func printChecks(w io.Writer, dir string, r *result.Result, files []string) {
	c := r.Check()
	if c.HasData {
		fmt.Fprintf(w, "folded chi-square: %s over %d reco bins (in reco space: data against the folded estimate, correlations ignored; not a goodness-of-fit test)\n", formatG4(c.FoldedChi2), c.FoldedBins)
	}
	if r.Covariance != nil {
		cond := "infinite (singular)"
		if r.CovarianceCondition != nil {
			cond = formatG4(*r.CovarianceCondition)
		}
		fmt.Fprintf(w, "covariance: condition number %s over the determined truth bins; a chi-square with it uses its pseudo-inverse (desmear help method, §19)\n", cond)
	}
	checks := []string{fmt.Sprintf("%d truth bins not determined", c.Undetermined),
		fmt.Sprintf("%d with efficiency below %g", c.LowEfficiency, result.LowEfficiency)}
	if r.Purity != nil {
		checks = append(checks, fmt.Sprintf("%d with purity below %g", c.LowPurity, result.LowPurity))
	}
	checks = append(checks, fmt.Sprintf("%d reco bins clipped", c.Clipped))
	fmt.Fprintf(w, "checks: %s\n", strings.Join(checks, ", "))
	var diag []string
	for _, name := range result.DiagnosticsFiles() {
		if slices.Contains(files, name) {
			diag = append(diag, filepath.Join(dir, name))
		}
	}
	if len(diag) > 0 {
		fmt.Fprintf(w, "diagnostics: %s\n", strings.Join(diag, ", "))
	}
	var derived []string
	for _, d := range r.Derived {
		if slices.Contains(files, d.File) {
			derived = append(derived, filepath.Join(dir, d.File))
		}
	}
	if len(derived) > 0 {
		fmt.Fprintf(w, "derived: %s\n", strings.Join(derived, ", "))
	}
}

// formatG4 formats a chi-square for the summary.
func formatG4(v float64) string { return fmt.Sprintf("%.4g", v) }

// fileList returns the names of files for a summary line, each file of
// a sub-folder counted under the folder ("plots/ (18 files)").
func fileList(files []string, sep string) string {
	var out []string
	count := map[string]int{}
	for _, f := range files {
		dir, _, ok := strings.Cut(f, "/")
		if !ok {
			out = append(out, f)
			continue
		}
		if count[dir] == 0 {
			out = append(out, dir+"/")
		}
		count[dir]++
	}
	for i, f := range out {
		if n := count[strings.TrimSuffix(f, "/")]; n > 0 && strings.HasSuffix(f, "/") {
			out[i] = fmt.Sprintf("%s (%d files)", f, n)
		}
	}
	return strings.Join(out, sep)
}
