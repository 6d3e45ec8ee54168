package main

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"strings"
	"time"

	"github.com/spf13/cobra"
	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/demo"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

type demoOptions struct {
	out      string
	events   int
	seed     uint64
	force    bool
	noReport bool
}

func newDemoCommand(g *globalOptions) *cobra.Command {
	o := demoOptions{out: "demo-out", events: demo.DefaultEvents, seed: demo.DefaultSeed}
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Generate an invented double-differential measurement and unfold it end to end",
		Long: `demo runs the main job on invented data. It generates, with a fixed seed, a
fictional measurement: the made-up "zeton" particle of an imaginary "demo
run", in transverse momentum pt (GeV) and absolute rapidity |y|. It writes
the simulated events (truth and reco values, weights, selection flags) and
the pseudo-data as ROOT and Parquet files, the truth and reco binnings and
an analysis file into the output folder; then it runs that analysis
(response from the simulated events, data filled from the Parquet file,
iterative Bayesian unfolding with the full covariance) and writes the
result folder inside it. It prints where everything is and a table of the
unfolded spectrum against the known truth of the pseudo-data.

The pseudo-data are drawn from a spectrum of a different shape than the
simulation's (harder in pt, narrower in |y|), so the result is not the
prior. All numbers are invented; nothing comes from a real experiment.

The same --events and --seed give the same files and results on any number
of cores (the ROOT files differ only in the write times they record).`,
		Example: `  desmear demo
  desmear demo --out /tmp/zeton --events 300000 --seed 7
  desmear demo --force    # replace an earlier demo folder`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runDemo(cmd, g, &o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.out, "out", o.out, "output folder: the generated inputs, and the result in its sub-folder "+demo.ResultFolder)
	f.IntVar(&o.events, "events", o.events, fmt.Sprintf("number of simulated events, %d to %d; the pseudo-data get about a tenth as many reconstructed events", demo.MinEvents, demo.MaxEvents))
	f.Uint64Var(&o.seed, "seed", o.seed, "seed of the generator")
	f.BoolVar(&o.force, "force", false, "replace the output folder if it holds an earlier demo (never any other folder)")
	f.BoolVar(&o.noReport, "no-report", false, "write no plots and no report.html in the result folder")
	return cmd
}

func runDemo(cmd *cobra.Command, g *globalOptions, o *demoOptions) error {
	ctx := cmd.Context()
	if o.events < demo.MinEvents || o.events > demo.MaxEvents {
		return usagef("--events %d: choose between %d and %d", o.events, demo.MinEvents, demo.MaxEvents)
	}
	if strings.TrimSpace(o.out) == "" {
		return usagef("--out: name a folder")
	}
	diag := g.stderr
	if g.quiet {
		diag = io.Discard
	}
	if err := demo.CheckFolder(o.out, o.force); err != nil {
		return demoFolderErr(err, o.out)
	}
	start := time.Now()
	fmt.Fprintf(diag, "desmear demo: generating %d simulated events and the pseudo-data (seed %d) into %s\n", o.events, o.seed, o.out)
	// The inputs and the result are written in one temporary folder,
	// installed whole at the end: an earlier demo folder stays intact
	// until then, and an interrupted or failed run leaves nothing.
	st, err := demo.Stage(ctx, o.out, demo.Config{Events: o.events, Seed: o.seed}, o.force)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return demoFolderErr(err, o.out)
	}
	defer st.Abort()
	in := st.Inputs
	fmt.Fprintf(diag, "desmear demo: inputs written in %.1f s; running %s\n", time.Since(start).Seconds(), in.Path(demo.AnalysisFile))
	t1 := time.Now()
	_, out, err := runAnalysisWith(ctx, g, st.Path(demo.AnalysisFile), false, o.noReport, &analysis.Options{Staged: st.Dir(), Final: in.Dir})
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return err
	}
	if err := st.Commit(); err != nil {
		return demoFolderErr(err, o.out)
	}
	fmt.Fprintf(diag, "desmear demo: analysis done in %.1f s (total %.1f s)\n", time.Since(t1).Seconds(), time.Since(start).Seconds())
	res := out.Result
	var cov mat.Symmetric // nil unless the analysis computed the full covariance
	if res.Covariance != nil {
		cov = res.Covariance
	}
	cmp, err := demo.Compare(in.Truth, res.Estimate, res.Uncertainty, cov)
	if err != nil {
		return numericalErr(err)
	}
	w := bufio.NewWriter(g.stdout)
	printDemo(w, in, out, cmp)
	printChecks(w, out.Folder, out.Document, out.Files)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}

// demoFolderErr classifies an error of writing the demo folder out: a
// refused folder is a usage error, anything else an I/O error.
func demoFolderErr(err error, out string) error {
	switch {
	case errors.Is(err, demo.ErrNotDemoFolder):
		return usageErr(err)
	case errors.Is(err, fs.ErrExist):
		return usagef("demo: %s already exists (replace it with --force)", out)
	}
	return ioErr(err)
}

// printDemo prints where the inputs and results are and the table of
// unfolded against known truth.
func printDemo(w io.Writer, in *demo.Inputs, out *analysis.Outcome, cmp *demo.Comparison) {
	fmt.Fprintf(w, "desmear demo: invented data (the made-up zeton of the imaginary \"demo run\"; no real experiment)\n")
	fmt.Fprintf(w, "inputs:  %s\n", in.Dir)
	fmt.Fprintf(w, "         %s  %s (%d simulated events)  %s (%d pseudo-data events)\n",
		demo.AnalysisFile, demo.SimulationROOT, in.SimulatedEvents, demo.DataParquet, in.DataEvents)
	fmt.Fprintf(w, "         seed %d; known truth of the pseudo-data: %s\n", in.Config.Seed, demo.TruthFile)
	fmt.Fprintf(w, "results: %s\n", out.Folder)
	if len(out.Files) > 0 {
		fmt.Fprintf(w, "         %s\n", fileList(out.Files, "  "))
	}
	fmt.Fprintf(w, "\nUnfolded (%d iterations, prior: the simulation) vs. known truth, expected zetons per in-range truth bin:\n", bayes.DetailsOf(out.Result).Iterations)
	labelW := len("bin")
	for _, r := range cmp.Rows {
		labelW = max(labelW, len(r.Label))
	}
	fmt.Fprintf(w, "%3s  %-*s  %9s  %9s  %-9s  %6s\n", "", labelW, "bin", "truth", "unfolded", "± uncert.", "pull")
	for _, r := range cmp.Rows {
		pull := "-"
		if !math.IsNaN(r.Pull) {
			pull = fmt.Sprintf("%+.2f", r.Pull)
		}
		fmt.Fprintf(w, "%3d  %-*s  %9.1f  %9.1f  ± %-7.1f  %6s\n", r.Bin, labelW, r.Label, r.Truth, r.Unfolded, r.Uncertainty, pull)
	}
	if cmp.NDF > 0 {
		fmt.Fprintf(w, "\nchi2/ndf = %.1f/%d = %.2f (p-value %.2f) with the full covariance of the in-range bins through its pseudo-inverse\n", cmp.Chi2, cmp.NDF, cmp.Chi2/float64(cmp.NDF), cmp.PValue)
		fmt.Fprintf(w, "         (eigenvalues below %.0e of the largest dropped: ndf = %d of %d directions kept; condition number %.3g; desmear help method, §19)\n", unfold.EigenvalueCut, cmp.NDF, len(cmp.Rows), cmp.Condition)
	}
	fmt.Fprintf(w, "pull = (unfolded - truth) / uncertainty: data-statistical uncertainty only; neighbouring bins are correlated.\n")
	fmt.Fprintf(w, "stress test (simulation reweighted to the true spectrum): desmear unfold %s\n", in.Path(demo.StressFile))
}
