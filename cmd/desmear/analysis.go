package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"slices"
	"sync"
	"text/tabwriter"
	"time"

	"github.com/schollz/progressbar/v3"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/result"
)

// runAnalysisUnfold is "desmear unfold ANALYSIS.yaml": the whole job from
// an analysis file. replace is the unfold command's --force (replace an
// earlier result folder).
func runAnalysisUnfold(ctx context.Context, g *globalOptions, path string, replace, noReport bool) error {
	a, out, err := runAnalysis(ctx, g, path, replace, noReport)
	if err != nil {
		return err
	}
	return printAnalysisOutcome(g, a, out)
}

// printAnalysisOutcome prints what "desmear unfold ANALYSIS.yaml" prints
// once the result folder of the analysis a is written: where the result
// is, its table and its checks on stdout, then the notes on the truth
// bins on stderr. The merge of a plan whose shards unfold the analysis
// again prints the same.
func printAnalysisOutcome(g *globalOptions, a *analysis.Analysis, out *analysis.Outcome) error {
	w := bufio.NewWriter(g.stdout)
	printOutcome(w, a, out)
	printChecks(w, out.Folder, out.Document, out.Files)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	printBinNotes(g, out.Document, a.Truth, "uncertainty.method: toys")
	return nil
}

// printRunNotes prints on stderr what the run of the analysis a reports
// of itself in out: the remedies applied, the warnings on the inputs and
// (unless quiet) the notes, one line each.
func printRunNotes(g *globalOptions, a *analysis.Analysis, out *analysis.Outcome) {
	printRemedies(g, out.Remedies, a.Reco.Label, a.Truth.Label)
	printWarnings(g, out.Warnings)
	if g.quiet {
		return
	}
	for _, n := range out.Notes {
		fmt.Fprintf(g.stderr, "note: %s\n", n)
	}
}

// runAnalysis loads the analysis file at path and runs it (without the
// report when noReport is set), with a
// progress bar on stderr when it is a terminal. It returns the analysis
// and what the run produced.
func runAnalysis(ctx context.Context, g *globalOptions, path string, replace, noReport bool) (*analysis.Analysis, *analysis.Outcome, error) {
	return runAnalysisWith(ctx, g, path, replace, noReport, &analysis.Options{})
}

// runAnalysisWith is runAnalysis with the options opt (the progress and
// the version are filled in here).
func runAnalysisWith(ctx context.Context, g *globalOptions, path string, replace, noReport bool, opt *analysis.Options) (*analysis.Analysis, *analysis.Outcome, error) {
	a, err := analysis.Load(path)
	if err != nil {
		return nil, nil, analysisErr(err)
	}
	if noReport {
		a.Output.Formats = withoutReport(a.Output.Formats)
	}
	if err := a.CheckOutput(replace); err != nil {
		switch {
		case errors.Is(err, result.ErrExists):
			return nil, nil, usagef("%v (use --force to replace an earlier result)", err)
		case errors.Is(err, result.ErrNotResult):
			return nil, nil, usagef("%v; it is not replaced even with --force: choose another result.folder", err)
		}
		return nil, nil, ioErr(err)
	}
	p := newProgress(g)
	defer p.finish()
	start := time.Now()
	opt.Progress, opt.Version = p.report, version
	out, err := a.Run(ctx, opt, replace)
	p.finish()
	if err != nil {
		return nil, nil, analysisErr(err)
	}
	printRunNotes(g, a, out)
	if !g.quiet {
		shown := path
		if opt.Staged != "" {
			shown = filepath.Join(opt.Final, filepath.Base(path))
		}
		fmt.Fprintf(g.stderr, "desmear: analysis %s done in %.1f s\n", shown, time.Since(start).Seconds())
	}
	return a, out, nil
}

// analysisErr adds to an error of an analysis run the advice that names
// the command line or the keys to change: the command that builds a
// missing or outdated saved response, and the keys to change when the
// memory limit is too small. exitCode classifies it.
func analysisErr(err error) error {
	var (
		tl *unfold.TooLargeError
		ae *analysis.Error
	)
	switch {
	case errors.Is(err, analysis.ErrResponseNeeded) && errors.As(err, &ae):
		return fmt.Errorf("%w with \"desmear response %s\"", err, ae.File)
	case errors.As(err, &tl):
		return fmt.Errorf("%w (in the analysis file: uncertainty.covariance: diag, or a larger unfolding.memory_limit_gib)", err)
	}
	return err
}

// progress draws one bar per stage on stderr, only when stderr is a
// terminal (and not switched off).
type progress struct {
	mu    sync.Mutex
	on    bool
	w     io.Writer
	stage string
	unit  string // what is counted ("events" unless set)
	bar   *progressbar.ProgressBar
}

func newProgress(g *globalOptions) *progress {
	return &progress{on: g.progress(), w: g.stderr, unit: "events"}
}

func (p *progress) report(stage string, done, total int64) {
	if !p.on {
		return
	}
	p.mu.Lock()
	defer p.mu.Unlock()
	if stage != p.stage || p.bar == nil {
		if p.bar != nil {
			p.bar.Finish()
		}
		p.stage = stage
		max := total
		if max <= 0 {
			max = -1
		}
		p.bar = progressbar.NewOptions64(max,
			progressbar.OptionSetWriter(p.w),
			progressbar.OptionSetDescription(stage),
			progressbar.OptionShowCount(),
			progressbar.OptionSetItsString(p.unit),
			progressbar.OptionShowIts(),
			progressbar.OptionThrottle(100*time.Millisecond),
			progressbar.OptionClearOnFinish(),
		)
	}
	p.bar.Set64(done)
}

func (p *progress) finish() {
	p.mu.Lock()
	defer p.mu.Unlock()
	if p.bar != nil {
		p.bar.Finish()
		p.bar = nil
	}
}

// printOutcome prints where the result is and a short table of the
// estimate per in-range truth bin.
func printOutcome(w io.Writer, a *analysis.Analysis, out *analysis.Outcome) {
	res := out.Result
	fmt.Fprintf(w, "result: %s (%s)\n", out.Folder, fileList(out.Files, ", "))
	if m := methodSummary(res.Details); m != "" {
		fmt.Fprintf(w, "method: %s\n", m)
	} else {
		det := bayes.DetailsOf(res)
		fmt.Fprintf(w, "iterations: %s\n", stopSummary(det.Iterations, det.StoppedBy, a.Unfolding.StopChi2))
	}
	// As in plain-table mode, the per-bin table is printed for small
	// problems only; the result folder holds every bin.
	if n := a.Truth.InRange(); n > maxTableRows {
		file := result.JSONFile
		if slices.Contains(out.Files, result.CSVFile) {
			file = result.CSVFile
		}
		fmt.Fprintf(w, "%d in-range truth bins: the estimates are in %s\n", n, filepath.Join(out.Folder, file))
		printComparison(w, out.Document, a.Truth)
		return
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "bin\tlabel\testimate\tuncertainty\tefficiency\t\n")
	for j := 0; j < a.Truth.InRange(); j++ {
		u := "-"
		if res.Uncertainty != nil {
			u = fmt.Sprintf("%.4g", res.Uncertainty[j])
		}
		e := fmt.Sprintf("%.3f", res.Efficiency[j]) // 0 in bins not determined, never NaN
		est := fmt.Sprintf("%.6g", res.Estimate[j])
		if !res.Determined[j] {
			est = "not determined"
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%s\t%s\t\n", j, a.Truth.Label(j), est, u, e)
	}
	tw.Flush()
	printComparison(w, out.Document, a.Truth)
}

// printWarnings prints the warnings on the inputs on stderr, one line
// each.
func printWarnings(g *globalOptions, warnings []string) {
	if g.quiet {
		return
	}
	for _, w := range warnings {
		fmt.Fprintf(g.stderr, "desmear: warning: %s\n", w)
	}
}
