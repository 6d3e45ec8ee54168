package main

import (
	"encoding/json"
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/unfold/bench"
)

type benchOptions struct {
	size string
	json bool
}

func newBenchCommand(g *globalOptions) *cobra.Command {
	var o benchOptions
	cmd := &cobra.Command{
		Use:   "bench",
		Short: "Measure this machine on a synthetic unfolding problem",
		Long: `bench builds a seeded synthetic three-dimensional problem (truth grid of
20×20×20 bins for --size small, 50×50×40 for medium, 100×100×50 for fine;
the reco grid twice as fine along the third axis; about 20 migrations per
truth bin across all three axes, efficiencies below one, fakes, flow bins)
and measures in one run: first the whole job (the response filled from
events generated in memory, then one unfolding with per-bin variances from
random probes) and the peak resident memory at its end, before anything
else has allocated; then the memory bandwidth of a triad over arrays larger
than the matrix, the bare sweep over the matrix, the marginal iteration,
the fixed cost of one more unfolding of a prepared problem, a whole
unfolding, per-bin variances from random probes, Poisson toys, response
filling from events in memory and from a Parquet file written to a
temporary folder (beside the reader's own decoding of the columns the
filling needs, in interleaved rounds, as a ratio), and the peak resident
memory. Each kernel is also given as a ratio to the bandwidth floor of
the bytes it must move (the byte model is printed with the results). Times are medians of interleaved
rounds; compare ratios between runs, since shared machines move their
bandwidth by up to 2x.

The results go to standard output, as a table or, with --json, as one JSON
object; the stages are reported on standard error when it is a terminal.`,
		Example: `  desmear bench
  desmear bench --size fine --json > bench.json`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return runBench(cmd, g, &o)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.size, "size", "small", "problem size: small (8,000 truth bins, seconds), medium (100,000) or fine (500,000 truth × 1,000,000 reco bins, 10 M non-zeros; one to two minutes and 2 GB)")
	f.BoolVar(&o.json, "json", false, "print the results as one JSON object instead of a table")
	return cmd
}

func runBench(cmd *cobra.Command, g *globalOptions, o *benchOptions) error {
	size := bench.Size(o.size)
	c, err := bench.ConfigOf(size)
	if err != nil {
		return usagef("--size: %v", err)
	}
	var progress func(string)
	if g.progress() {
		progress = func(stage string) { fmt.Fprintf(g.stderr, "bench: %s\n", stage) }
	}
	r, err := bench.Run(cmd.Context(), size, c, progress)
	if err != nil {
		return err
	}
	if o.json {
		enc := json.NewEncoder(g.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(r)
	}
	return printBench(g.stdout, r)
}

func printBench(w io.Writer, r *bench.Results) error {
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintf(tw, "problem\t%s: %d truth × %d reco bins, %d non-zeros, %d cores, %d rounds, %s\n", r.Size, r.TruthBins, r.RecoBins, r.NonZeros, r.Cores, r.Rounds, r.Date)
	fmt.Fprintf(tw, "triad bandwidth\t%.1f GB/s\n", r.TriadGBs)
	fmt.Fprintf(tw, "bare sweep\t%.3f ms\t%.2fx the bandwidth floor\n", r.SweepMS, r.SweepFloorRatio)
	bound := ""
	if r.IterationEstimate == "upper-bound" {
		bound = " (an upper bound: the noise of this run swamped the difference)"
	}
	fmt.Fprintf(tw, "marginal iteration\t%.3f ms\t%.2fx the bandwidth floor, %.2fx the sweep%s; ensembles' form, no log-likelihood\n", r.IterationMS, r.IterationFloorRatio, r.IterationSweepRatio, bound)
	fmt.Fprintf(tw, "marginal iteration with the log-likelihood\t%.3f ms\t%.2fx the sweep; as a single unfolding records it\n", r.IterationLogLikMS, r.IterationLogLikSweepRatio)
	fmt.Fprintf(tw, "one more unfolding of a prepared problem\t%.3f ms\t%d iterations; fixed cost %.3f ms\n", r.PreparedMS, r.Iterations, r.UnfoldingFixedMS)
	fmt.Fprintf(tw, "whole unfolding\t%.3f ms\t%d iterations\n", r.UnfoldingMS, r.Iterations)
	fmt.Fprintf(tw, "per-bin variances from probes\t%.3f s\t%d probes, whole unfolding\n", r.ProbesS, r.Probes)
	fmt.Fprintf(tw, "Poisson toys\t%.1f toys/s\t%d toys\n", r.ToysPerS, r.Toys)
	fmt.Fprintf(tw, "response filling in memory\t%.2f M entries/s\t%d events\n", r.FillEntriesPerS/1e6, r.FillEvents)
	fmt.Fprintf(tw, "response filling from Parquet\t%.2f M events/s\t%d events, 3 observables per level; %.2f M events per CPU-second\n", r.ParquetEventsPerS/1e6, r.ParquetEvents, r.ParquetEventsPerCPUS/1e6)
	fmt.Fprintf(tw, "Parquet decoding of the same 7 columns\t%.2f M events/s\tthe filling at %.3fx its rate (%.3fx per CPU-second); %d interleaved rounds\n", r.ParquetDecodeEventsPerS/1e6, r.ParquetDecodeRatio, r.ParquetDecodeCPURatio, r.ParquetRounds)
	fmt.Fprintf(tw, "whole job\t%.3f s\tfill %d events %.3f s, unfolding with %d probes %.3f s; peak resident memory %.0f MB (measured first)\n",
		r.JobS, r.JobEvents, r.JobFillS, r.Probes, r.JobUnfoldS, float64(r.JobPeakRSSBytes)/1e6)
	fmt.Fprintf(tw, "peak resident memory\t%.0f MB\twhole bench process\n", float64(r.PeakRSSBytes)/1e6)
	if err := tw.Flush(); err != nil {
		return err
	}
	_, err := fmt.Fprintf(w, "byte model: %s\n", r.ByteModel)
	return err
}
