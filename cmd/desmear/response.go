package main

import (
	"bufio"
	"context"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/response"
)

// shardEvents is the number of events of a response shard (0: the
// library's default); the tests make it small.
var shardEvents int64

type responseOptions struct {
	out     string
	tables  string
	force   bool
	maxBins int
	shard   string
}

func newResponseCommand(g *globalOptions) *cobra.Command {
	o := &responseOptions{}
	cmd := &cobra.Command{
		Use:   "response ANALYSIS.yaml",
		Short: "Build the response from the simulated events of an analysis file and save it",
		Long: `Build the response of an analysis from its simulated samples: every event
is located in the truth binning (if it passes the truth selection) and in
the reco binning (if it passes the reco selection). Located at both levels
it is a migration, at truth level only a miss, at reco level only a fake
(expected background). Events outside a binning whose flow is switched off
are counted and reported.

The response is saved as a bundle folder (--out; by default the analysis
file's "response" key, or "response" beside the analysis file), which
"desmear unfold ANALYSIS.yaml" loads when the analysis file names it. With
--tables DIR the response is also written as the plain tables response.csv,
generated.csv and background.csv (the simulation's fakes plus the scaled
background samples) that "desmear unfold --response ..." reads; with the
same data and settings both paths give the same result.

The summary (events, migrations, misses, fakes, outside counts, negative
cells, and per truth bin the efficiency, purity and stability) goes to
standard output; for more than --max-bins truth bins the per-bin table is
left out (the bundle's response.json holds the generated counts and the
purity histograms, and "desmear unfold" writes efficiency, purity and
stability per bin into its result folder).

The response is built shard by shard: a shard is a range of 2^20 events
of one simulated sample, and the response is the merge of the shards'
partial responses in shard order. With --shard I/N only part I (0 to
N-1, for example a batch array index) of the N parts is built, a
consecutive block of the shards, and written as a part folder (--out,
required); "desmear response merge PART... --out BUNDLE" merges the N
parts into a bundle equal bit for bit to the one built in one run.`,
		Example: `  desmear response analysis.yaml
  desmear response analysis.yaml --out sim.response --tables tables/
  desmear response analysis.yaml --shard 3/16 --out parts/3
  desmear response merge parts/* --out sim.response`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runResponse(cmd.Context(), g, o, args[0])
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.out, "out", "", "response bundle folder `DIR` to write (default: the analysis file's response key, else \"response\" beside it)")
	f.StringVar(&o.tables, "tables", "", "also write response.csv, generated.csv and background.csv into folder `DIR`")
	f.BoolVar(&o.force, "force", false, "replace an earlier response bundle or tables folder")
	f.IntVar(&o.maxBins, "max-bins", 1000, "print the per-truth-bin table only up to `N` truth bins (0: always)")
	f.StringVar(&o.shard, "shard", "", "build only part `I/N` of the shards (I from 0 to N-1) and write it as a part folder to --out")
	cmd.AddCommand(newResponseMergeCommand(g))
	return cmd
}

type responseMergeOptions struct {
	out   string
	force bool
}

func newResponseMergeCommand(g *globalOptions) *cobra.Command {
	o := &responseMergeOptions{}
	cmd := &cobra.Command{
		Use:   "merge PART... --out BUNDLE",
		Short: "Merge the parts of a response built with --shard into a response bundle",
		Long: `Merge the part folders written by "desmear response ANALYSIS.yaml --shard
I/N --out PART" into a response bundle (--out). The parts must come from
the same analysis file, binnings and simulation files, and together hold
every shard exactly once: the shards missing and those given more than
once are listed otherwise. The partial responses are merged in shard
order, so the bundle is the one "desmear response ANALYSIS.yaml" writes,
bit for bit.`,
		Example: `  desmear response merge parts/0 parts/1 parts/2 --out sim.response`,
		Args:    cobra.MinimumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runResponseMerge(g, o, args)
		},
	}
	f := cmd.Flags()
	f.StringVar(&o.out, "out", "", "response bundle folder `DIR` to write (required)")
	f.BoolVar(&o.force, "force", false, "replace an earlier response bundle")
	return cmd
}

func runResponseMerge(g *globalOptions, o *responseMergeOptions, names []string) error {
	if o.out == "" {
		return usagef("give the response bundle to write with --out")
	}
	if err := refusedFolder(response.CheckBundle(o.out, o.force), o.out, "response bundle", response.BundleFiles()[0]); err != nil {
		return err
	}
	parts := make([]*response.Part, len(names))
	for i, name := range names {
		p, err := response.LoadPart(name)
		if err != nil {
			return inputErr(err)
		}
		parts[i] = p
	}
	r, info, err := response.MergeParts(parts, names)
	if err != nil {
		return inputErr(err)
	}
	return saveMerged(g, r, info, o.out, o.force, len(parts))
}

// saveMerged saves the response r merged from parts parts (info) as the
// bundle out, replacing an earlier bundle (or an empty folder) only when
// force is set, and prints where it is and the response's counts, as
// "desmear response merge" and the merge of a response plan both do.
func saveMerged(g *globalOptions, r *response.Built, info *response.BundleInfo, out string, force bool, parts int) error {
	if err := r.Save(out, *info, force); err != nil {
		return refusedFolder(err, out, "response bundle", response.BundleFiles()[0])
	}
	w := bufio.NewWriter(g.stdout)
	fmt.Fprintf(w, "response: %s (%d shards from %d parts)\n", out, len(info.Shards), parts)
	printResponseCounts(w, r)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}

// parseShard reads the value of --shard, I/N.
func parseShard(v string) (index, count int, err error) {
	a, b, ok := strings.Cut(v, "/")
	i, err1 := strconv.Atoi(a)
	n, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 0 || i >= n {
		return 0, 0, usagef("--shard %q: give I/N, part I (0 to N-1) of N parts, for example 0/8", v)
	}
	return i, n, nil
}

func runResponsePart(ctx context.Context, g *globalOptions, o *responseOptions, a *analysis.Analysis) error {
	index, count, err := parseShard(o.shard)
	if err != nil {
		return err
	}
	if o.out == "" {
		return usagef("--shard needs the part folder to write, --out PART")
	}
	if o.tables != "" {
		return usagef("--tables needs the whole response: write the tables from the merged bundle's analysis run instead of with --shard")
	}
	if err := refusedFolder(response.CheckPart(o.out, o.force), o.out, "response part", "part.json"); err != nil {
		return err
	}
	p := newProgress(g)
	defer p.finish()
	part, err := a.BuildPart(ctx, index, count, &analysis.Options{Progress: p.report, Version: version, ShardEvents: shardEvents})
	p.finish()
	if err != nil {
		return analysisErr(err)
	}
	if err := part.Save(o.out, o.force); err != nil {
		return refusedFolder(err, o.out, "response part", "part.json")
	}
	var events int64
	for _, r := range part.Partials {
		events += r.Summary.Events
	}
	fmt.Fprintf(g.stdout, "part:   %s (part %d of %d: %d of the %d shards, %d events)\n", o.out, index, count, len(part.Numbers), len(part.Info.Shards), events)
	return nil
}

func runResponse(ctx context.Context, g *globalOptions, o *responseOptions, path string) error {
	if o.maxBins < 0 {
		return usagef("--max-bins %d: give a number of truth bins, or 0 to always print the per-bin table", o.maxBins)
	}
	if o.shard != "" {
		if _, _, err := parseShard(o.shard); err != nil {
			return err
		}
	}
	a, err := analysis.Load(path)
	if err != nil {
		return analysisErr(err)
	}
	if o.shard != "" {
		return runResponsePart(ctx, g, o, a)
	}
	out := o.out
	if out == "" {
		out = a.ResponseFile
		if out == "" {
			out = filepath.Join(a.Dir, "response")
		}
	}
	if err := refusedFolder(response.CheckBundle(out, o.force), out, "response bundle", response.BundleFiles()[0]); err != nil {
		return err
	}
	if o.tables != "" {
		if err := refusedFolder(tables.CheckFolder(o.tables, o.force), o.tables, "tables folder", tables.ResponseFile); err != nil {
			return err
		}
	}
	p := newProgress(g)
	defer p.finish()
	r, info, err := a.BuildResponse(ctx, &analysis.Options{Progress: p.report, Version: version, ShardEvents: shardEvents})
	p.finish()
	if err != nil {
		return analysisErr(err)
	}
	printWarnings(g, a.ResponseWarnings(r))
	if err := r.Save(out, *info, o.force); err != nil {
		return refusedFolder(err, out, "response bundle", response.BundleFiles()[0])
	}
	if o.tables != "" {
		bkg, err := a.Background(ctx, r, &analysis.Options{Progress: p.report})
		p.finish()
		if err != nil {
			return analysisErr(err)
		}
		if err := writeTables(o.tables, r, bkg, o.force); err != nil {
			return refusedFolder(err, o.tables, "tables folder", tables.ResponseFile)
		}
	}
	w := bufio.NewWriter(g.stdout)
	fmt.Fprintf(w, "response: %s\n", out)
	if o.tables != "" {
		fmt.Fprintf(w, "tables:   %s (response.csv, generated.csv, background.csv)\n", o.tables)
	}
	printResponseSummary(w, a, r, o.maxBins)
	if len(info.Samples) > 1 {
		fmt.Fprintln(w)
		tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
		fmt.Fprintf(tw, "sample\tevents\tmigrations\tmisses\tfakes\toutside truth\toutside reco\t\n")
		for _, s := range info.Samples {
			c := s.Summary
			fmt.Fprintf(tw, "%s\t%d\t%d\t%d\t%d\t%d\t%d\t\n", s.File, c.Events, c.Entries, c.Misses, c.Fakes, c.OutsideTruth, c.OutsideReco)
		}
		tw.Flush()
	}
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}

// writeTables writes the plain tables of the response into dir,
// atomically. runResponse has checked that an existing dir may be
// replaced; the check is made again before the rename, as the response
// build can take long enough for a folder to appear at dir meanwhile.
func writeTables(dir string, r *response.Built, bkg *analysis.Expected, replace bool) error {
	t := &tables.Folder{Response: r.Migrations, Generated: r.Generated, GeneratedSumW2: r.GeneratedSumW2,
		Background: make([]float64, r.RecoBins()), BackgroundVariance: make([]float64, r.RecoBins())}
	if bkg != nil {
		t.Background, t.BackgroundVariance = bkg.Values, bkg.Variance
	}
	return tables.WriteFolder(dir, t, replace)
}

// printResponseSummary prints the event counts and the per-truth-bin quality of
// a response.
func printResponseSummary(w io.Writer, a *analysis.Analysis, r *response.Built, maxBins int) {
	printResponseCounts(w, r)
	fmt.Fprintln(w)
	printResponseTable(w, a, r, maxBins)
}

// printResponseCounts prints the event counts and negative cells of a
// response.
func printResponseCounts(w io.Writer, r *response.Built) {
	s := r.Summary
	fmt.Fprintf(w, "events read:        %d\n", s.Events)
	fmt.Fprintf(w, "migration entries:  %d (%d distinct cells)\n", s.Entries, r.Migrations.NNZ())
	fmt.Fprintf(w, "misses:             %d (truth only)\n", s.Misses)
	fmt.Fprintf(w, "fakes:              %d (reco only)\n", s.Fakes)
	fmt.Fprintf(w, "outside truth:      %d (passed the truth selection, no truth bin; counted as fakes when reconstructed)\n", s.OutsideTruth)
	fmt.Fprintf(w, "outside reco:       %d (passed the reco selection, no reco bin; counted as misses when generated in a truth bin)\n", s.OutsideReco)
	fmt.Fprintf(w, "negative cells:     %d", s.NegativeCellCount)
	if len(s.NegativeCells) > 0 {
		var parts []string
		for i, c := range s.NegativeCells {
			if i == 5 {
				parts = append(parts, "...")
				break
			}
			parts = append(parts, fmt.Sprintf("(reco %d, truth %d) = %.4g", c.Reco, c.Truth, c.Value))
		}
		fmt.Fprintf(w, ": %s", strings.Join(parts, ", "))
	}
	fmt.Fprintln(w)
	if len(s.NegativeGenerated) > 0 {
		fmt.Fprintf(w, "negative generated: truth bins %v\n", s.NegativeGenerated)
	}
}

// printResponseTable prints the per-truth-bin quality of a response.
func printResponseTable(w io.Writer, a *analysis.Analysis, r *response.Built, maxBins int) {
	if n := a.Truth.Len(); maxBins > 0 && n > maxBins {
		fmt.Fprintf(w, "%d truth bins: per-bin table left out (more than --max-bins %d)\n", n, maxBins)
		return
	}
	eff, pur, stab := r.Efficiency(nil), r.Purity(nil), r.Stability(nil)
	num := func(v []float64, j int) string {
		if v == nil || math.IsNaN(v[j]) {
			return "-"
		}
		return fmt.Sprintf("%.3f", v[j])
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "truth bin\tlabel\tgenerated\tefficiency\tpurity\tstability\t\n")
	for j := 0; j < a.Truth.Len(); j++ {
		fmt.Fprintf(tw, "%d\t%s\t%.6g\t%s\t%s\t%s\t\n", j, a.Truth.Label(j), r.Generated[j], num(eff, j), num(pur, j), num(stab, j))
	}
	tw.Flush()
	if pur == nil {
		fmt.Fprintln(w, "(purity and stability need a reco observable for every truth axis name)")
	}
}
