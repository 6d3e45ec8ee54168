package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sync"

	"github.com/spf13/cobra"

	"github.com/desmear/desmear/cmd/desmear/internal/flagval"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
	"github.com/desmear/desmear/unfold/response"
	"github.com/desmear/desmear/unfold/result"
	"github.com/desmear/desmear/unfold/validate"
)

func newBatchCommand(g *globalOptions) *cobra.Command {
	cmd := &cobra.Command{
		Use:   "batch (plan | run | run-local | status | merge | submit)",
		Short: "Split a toy ensemble, a response build, the systematic variations or the bootstrap replicas into shards, run them here or on a Slurm cluster, merge them exactly",
		Long: `batch splits the toy ensemble of a validation, the building of a
response, or the systematic variations or bootstrap replicas of an analysis
file, into shards that
separate processes or cluster jobs run, and merges their partial results
into the validation folder "desmear validate" writes (or the bundle
"desmear response" writes, or the result folder "desmear unfold" writes),
bit for bit.

  desmear batch plan ANALYSIS.yaml --toys N --shards K --workdir DIR
  desmear batch plan ANALYSIS.yaml --response --shards K --workdir DIR
  desmear batch plan ANALYSIS.yaml --variations --shards K --workdir DIR
  desmear batch plan ANALYSIS.yaml --replicas N --shards K --workdir DIR
  desmear batch run DIR --shard I          (one shard; a finished one is skipped)
  desmear batch run-local DIR --jobs J     (every shard here, J at a time)
  desmear batch status DIR                 (from the shard files)
  desmear batch merge DIR                  (writes the validation folder, bundle or result)
  desmear batch submit DIR --slurm         (a job array and a dependent merge)

See "desmear help cluster".`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, args []string) error {
			return usagef("batch needs a subcommand: plan, run, run-local, status, merge or submit (see \"desmear batch --help\")")
		},
	}
	cmd.AddCommand(newBatchPlanCommand(g), newBatchRunCommand(g), newBatchRunLocalCommand(g),
		newBatchStatusCommand(g), newBatchMergeCommand(g), newBatchSubmitCommand(g))
	for _, c := range cmd.Commands() {
		withUsageHint(c)
	}
	return cmd
}

// batchPlanOptions are the options of "desmear batch plan".
type batchPlanOptions struct {
	validateOptions
	replicas   int
	variations bool
	response   bool
	shards     int
	workdir    string
}

func newBatchPlanCommand(g *globalOptions) *cobra.Command {
	var o batchPlanOptions
	cmd := &cobra.Command{
		Use:   "plan ANALYSIS.yaml (--toys N | --response | --replicas N | --variations) --shards K --workdir DIR [flags]",
		Short: "Write the plan of an ensemble split into shards",
		Long: `plan assembles the analysis (building its response and filling its data),
and writes DIR/plan.json: the analysis file and the assembled inputs by
SHA-256, the settings of the ensemble, its units (blocks of ` + fmt.Sprint(validate.BlockToys) + ` toys, each
with its seed and stream) and their split into K shards. Every shard and
the merge check that the inputs are still those of the plan.

With --response the plan is of the analysis's response built in K parts
(each part a consecutive block of the response shards, as "desmear
response ANALYSIS.yaml --shard I/K" builds it); the merge writes the
response bundle (DIR/response unless --out) that "desmear response" writes
in one run.

With --variations the plan is of the analysis file's systematic variations,
one unit each (an up/down pair is one unit), at most one shard per
variation: each shard unfolds the nominal data as "desmear unfold
ANALYSIS.yaml" does and then its variations with the nominal settings, and
writes their varied estimates; the merge adds their shifts to the nominal
result and writes the result folder (the analysis file's output.folder
unless --out) that "desmear unfold ANALYSIS.yaml" writes in one run.

With --replicas N the plan is of the N bootstrap replicas of the simulated
events that the analysis file asks for (uncertainty.replicas: N), in units
of 50 replicas: each shard unfolds the nominal data and its replicas and
writes the ensembles of its units; the merge merges them in order, as one
run does, and writes the result folder that "desmear unfold ANALYSIS.yaml"
writes in one run.`,
		Example: `  desmear batch plan demo/analysis.yaml --toys 2000 --shards 40 --workdir toys`,
		Args:    cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runBatchPlan(cmd, g, &o, args[0])
		},
	}
	f := cmd.Flags()
	f.IntVar(&o.toys, "toys", 0, "plan a validation's toy ensemble of `N` toys")
	f.IntVar(&o.replicas, "replicas", 0, "plan the `N` bootstrap replicas of the analysis file (its uncertainty.replicas), merged into its result folder")
	f.BoolVar(&o.variations, "variations", false, "plan the systematic variations of the analysis file, one unit each, merged into its result folder")
	f.BoolVar(&o.response, "response", false, "plan the response built in K parts (\"desmear response --shard I/K\"), merged into a bundle")
	f.IntVar(&o.shards, "shards", 0, "number of shards `K`")
	f.StringVar(&o.workdir, "workdir", "", "work folder `DIR` of the plan and the shard files")
	f.StringVar(&o.out, "out", "", "folder the merge writes (default DIR/validation, DIR/response, or the analysis file's output.folder with --variations)")
	f.StringVar(&o.toyTruth, "toy-truth", "generated", "the truth the toys are drawn from (as \"desmear validate --toy-truth\")")
	f.IntVar(&o.maxK, "max-iterations", validate.DefaultMaxK, "scan 1..`K` iterations")
	f.Var(flagval.NewChoice(&o.criterion, validate.MinMSE, criterionNames(), validate.Criteria()),
		"criterion", "how the iteration count is recommended (as \"desmear validate --criterion\")")
	f.Float64Var(&o.threshold, "bias-threshold", validate.DefaultBiasThreshold, "threshold `X` of --criterion bias_below")
	f.Float64Var(&o.tilt, "tilt", validate.DefaultTiltPercent, "size in `PERCENT` of the linear tilts of the stress tests (0: none)")
	f.Uint64Var(&o.seed, "seed", 1, "random seed `S` of the toys")
	return cmd
}

func runBatchPlan(cmd *cobra.Command, g *globalOptions, o *batchPlanOptions, path string) error {
	chosen := map[batch.Kind]bool{
		batch.Toys: cmd.Flags().Changed("toys"), batch.Replicas: cmd.Flags().Changed("replicas"),
		batch.Variations: o.variations, batch.Response: o.response,
	}
	var kinds []batch.Kind
	for _, k := range batch.Kinds() {
		if chosen[k] {
			kinds = append(kinds, k)
		}
	}
	switch {
	case len(kinds) != 1:
		return usagef("batch plan needs one of --toys N, --response, --replicas N or --variations")
	case o.workdir == "":
		return usagef("batch plan needs --workdir DIR")
	case o.shards < 1:
		return usagef("--shards %d: give at least 1", o.shards)
	}
	k := kindOf(kinds[0])
	if kinds[0] != batch.Toys {
		for _, name := range []string{"toy-truth", "max-iterations", "criterion", "bias-threshold", "tilt", "seed"} {
			if cmd.Flags().Changed(name) {
				return usagef("--%s is an option of a toy ensemble (--toys N), not of %s", name, k.flag)
			}
		}
	}
	return k.plan(cmd.Context(), g, o, path)
}

// planKind is what a kind of plan states of its own; the batch commands
// do the rest: the plan's checks and line, running shards (one, or all
// J at a time), the status and the merge's checks of its folder.
type planKind struct {
	// flag is the kind's option of "desmear batch plan".
	flag string
	// plan writes the plan of the analysis file at path (see writePlan).
	plan func(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error
	// load checks the inputs of the plan p and loads what its shards
	// and its merge need.
	load func(ctx context.Context, g *globalOptions, p *batch.Plan) (shardJob, error)
	// describe says what the plan holds (with its units as planned,
	// when units is set).
	describe func(p *batch.Plan, units bool) string
	// shard names a shard in the notes of a run ("shard 3").
	shard string
	// members names the members of the ensemble in the counts of the
	// status, and in the notes of a run; none for a response.
	members string
	// folder names the folder the merge writes, check checks that it
	// may write it, and marker is the file that makes it a merged one.
	folder string
	check  func(dir string, force bool) error
	marker string
}

// kindOf returns what the kind k states of its own.
func kindOf(k batch.Kind) *planKind {
	// the variations and the replicas merge into a result folder
	toResult := func(k *planKind) *planKind {
		k.shard, k.folder, k.check, k.marker = "shard", "result folder", result.Check, result.JSONFile
		return k
	}
	switch k {
	case batch.Response:
		return &planKind{flag: "--response", plan: planResponse, load: loadResponseJob,
			describe: func(p *batch.Plan, _ bool) string { return fmt.Sprintf("the response in %d parts", len(p.Shards)) },
			shard:    "response part", folder: "response bundle", check: response.CheckBundle, marker: response.BundleFiles()[0]}
	case batch.Variations:
		return toResult(&planKind{flag: "--variations", plan: planVariations, load: loadVariationJob, members: "variations",
			describe: func(p *batch.Plan, _ bool) string {
				return fmt.Sprintf("%d systematic variations in %d shards", p.Members(), len(p.Shards))
			}})
	case batch.Replicas:
		return toResult(&planKind{flag: "--replicas", plan: planReplicas, load: loadReplicaJob, members: "replicas",
			describe: func(p *batch.Plan, units bool) string {
				if units {
					return fmt.Sprintf("%d bootstrap replicas in %d units of up to %d, %d shards", p.Members(), len(p.Replicas), analysis.ReplicaUnit, len(p.Shards))
				}
				return fmt.Sprintf("%d bootstrap replicas in %d shards", p.Members(), len(p.Shards))
			}})
	}
	return &planKind{flag: "--toys", plan: planToys, load: loadToyJob, members: "toys",
		describe: func(p *batch.Plan, units bool) string {
			if units {
				return fmt.Sprintf("%d toys in %d units of up to %d, %d shards", p.Members(), len(p.Units), validate.BlockToys, len(p.Shards))
			}
			return fmt.Sprintf("%s: %d toys in %d shards", p.Kind, p.Members(), len(p.Shards))
		},
		shard: "shard", folder: "validation folder", check: validate.CheckFolder, marker: validate.JSONFile}
}

// planFiles returns the absolute paths of the analysis file at path and
// of the folder the merge writes: out, or def when out is empty.
func planFiles(path, out, def string) (string, string, error) {
	abs, err := filepath.Abs(path)
	if err != nil {
		return "", "", ioErr(err)
	}
	if out == "" {
		out = def
	}
	if out, err = filepath.Abs(out); err != nil {
		return "", "", ioErr(err)
	}
	return abs, out, nil
}

// fileInput returns the analysis file at the absolute path abs with its
// SHA-256.
func fileInput(abs string) (batch.Input, error) {
	sum, err := batch.FileSum(abs)
	if err != nil {
		return batch.Input{}, inputErr(err)
	}
	return batch.Input{Path: abs, SHA256: sum}, nil
}

// writePlan writes the plan p made with err into the work folder and
// says what it holds.
func writePlan(g *globalOptions, o *batchPlanOptions, p *batch.Plan, err error) error {
	if err != nil {
		return usageErr(fmt.Errorf("--shards %d: %w", o.shards, err))
	}
	if err := p.Write(o.workdir); err != nil {
		return ioErr(err)
	}
	fmt.Fprintf(g.stdout, "plan: %s (%s); the merge writes %s\n", filepath.Join(o.workdir, batch.PlanFile), kindOf(p.Kind).describe(p, true), p.Out)
	return nil
}

// shardJob is a plan with what its shards and its merge need loaded.
type shardJob interface {
	plan() *batch.Plan
	// run runs shard s, which is not done, and says what it computed
	// (for the note "shard 3 (WHAT) done").
	run(ctx context.Context, g *globalOptions, dir string, s int) (string, error)
	// merge merges the shards of the work folder dir into the plan's
	// folder, which it may write (force: replace an earlier one), and
	// prints what it wrote.
	merge(ctx context.Context, g *globalOptions, dir string, force bool) error
}

// readPlan reads the plan of dir.
func readPlan(dir string) (*batch.Plan, error) {
	p, err := batch.Read(dir)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return nil, inputErr(fmt.Errorf("%w (make one with \"desmear batch plan\")", err))
		}
		return nil, inputErr(err)
	}
	return p, nil
}

// loadJob reads the plan of dir and loads what its shards need.
func loadJob(ctx context.Context, g *globalOptions, dir string) (shardJob, error) {
	p, err := readPlan(dir)
	if err != nil {
		return nil, err
	}
	return kindOf(p.Kind).load(ctx, g, p)
}

// checkPlanFile reports whether the analysis file of the plan p is
// still the plan's. The assembled problem is checked once it is
// assembled (checkProblem).
func checkPlanFile(p *batch.Plan) error {
	sum, err := batch.FileSum(p.Analysis.Path)
	if err != nil {
		return inputErr(fmt.Errorf("the plan's analysis file: %w", err))
	}
	if err := p.CheckAnalysis(sum); err != nil {
		return inputErr(err)
	}
	return nil
}

// checkProblem reports whether the problem assembled from the plan's
// analysis file, of SHA-256 psum (batch.ProblemSum), is the plan's.
func checkProblem(p *batch.Plan, psum string) error {
	if err := p.CheckProblem(psum); err != nil {
		return inputErr(err)
	}
	return nil
}

// runShard runs shard s of the job, unless it is done, and says so on
// stderr (mu keeps the notes of shards run at once apart).
func runShard(ctx context.Context, g *globalOptions, j shardJob, dir string, s int, mu *sync.Mutex) error {
	k := kindOf(j.plan().Kind)
	say := func(format string, a ...any) {
		if !g.quiet {
			mu.Lock()
			defer mu.Unlock()
			fmt.Fprintf(g.stderr, format, a...)
		}
	}
	if j.plan().ShardDone(dir, s) {
		say("desmear: %s %d was done already\n", k.shard, s)
		return nil
	}
	what, err := j.run(ctx, g, dir, s)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return err
	}
	say("desmear: %s %d (%s) done\n", k.shard, s, what)
	return nil
}

// memberRange says which members shard s of the plan p holds: "toys
// 50..99".
func memberRange(p *batch.Plan, s int) string {
	first, count := p.MemberRange(s)
	return fmt.Sprintf("%s %d..%d", kindOf(p.Kind).members, first, first+count-1)
}

// refused is refusedFolder for the folder the merge of the plan p
// writes.
func refused(err error, p *batch.Plan) error {
	k := kindOf(p.Kind)
	return refusedFolder(err, p.Out, k.folder, k.marker)
}

// mergeErr is the error of a merge of the shards of the work folder dir.
func mergeErr(err error, dir string) error {
	return inputErr(fmt.Errorf("%w (\"desmear batch status %s\" lists them)", err, dir))
}

func newBatchRunCommand(g *globalOptions) *cobra.Command {
	var shard int
	cmd := &cobra.Command{
		Use:   "run DIR --shard I",
		Short: "Run one shard of a plan",
		Long: `run runs shard I (0 to K-1) of the plan in DIR and writes its partial result
DIR/shards/shard-I.json atomically. A shard whose file exists and belongs to
the plan is not run again; a failed or interrupted shard leaves no file.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if !cmd.Flags().Changed("shard") {
				return usagef("batch run needs --shard I")
			}
			j, err := loadJob(cmd.Context(), g, args[0])
			if err != nil {
				return err
			}
			if n := len(j.plan().Shards); shard < 0 || shard >= n {
				return usagef("--shard %d: the plan has shards 0..%d", shard, n-1)
			}
			return runShard(cmd.Context(), g, j, args[0], shard, &sync.Mutex{})
		},
	}
	cmd.Flags().IntVar(&shard, "shard", 0, "the shard `I` to run (0 to K-1; a Slurm array index)")
	return cmd
}

func newBatchRunLocalCommand(g *globalOptions) *cobra.Command {
	var jobs int
	cmd := &cobra.Command{
		Use:   "run-local DIR [--jobs J]",
		Short: "Run every shard of a plan on this machine",
		Long: `run-local runs the shards of the plan in DIR that are not done, J at a time
in this process, each as "desmear batch run" would. Then merge.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if jobs < 1 {
				return usagef("--jobs %d: give at least 1", jobs)
			}
			ctx, dir := cmd.Context(), args[0]
			j, err := loadJob(ctx, g, dir)
			if err != nil {
				return err
			}
			var mu sync.Mutex
			next := make(chan int)
			n := len(j.plan().Shards)
			errs := make([]error, n)
			var wg sync.WaitGroup
			for range min(jobs, n) {
				wg.Go(func() {
					for s := range next {
						errs[s] = runShard(ctx, g, j, dir, s, &mu)
					}
				})
			}
			for s := range n {
				if ctx.Err() != nil {
					break
				}
				next <- s
			}
			close(next)
			wg.Wait()
			if err := ctx.Err(); err != nil {
				return err
			}
			return errors.Join(errs...)
		},
	}
	cmd.Flags().IntVar(&jobs, "jobs", 1, "shards `J` run at once")
	return cmd
}

func newBatchStatusCommand(g *globalOptions) *cobra.Command {
	return &cobra.Command{
		Use:   "status DIR",
		Short: "Report the shards of a plan done and missing, from the shard files",
		Args:  cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			p, err := readPlan(args[0])
			if err != nil {
				return err
			}
			pr, err := batch.Status(args[0], p)
			if err != nil {
				return ioErr(err)
			}
			k := kindOf(p.Kind)
			w := bufio.NewWriter(g.stdout)
			fmt.Fprintf(w, "plan: %s (%s)\n", filepath.Join(args[0], batch.PlanFile), k.describe(p, false))
			if k.members == "" {
				fmt.Fprintf(w, "done: %d of %d shards\n", len(pr.Done), len(p.Shards))
			} else {
				fmt.Fprintf(w, "done: %d of %d shards (%d of %d %s)\n", len(pr.Done), len(p.Shards), pr.MembersDone, p.Members(), k.members)
			}
			if len(pr.Missing) > 0 {
				fmt.Fprintf(w, "missing: %s\n", batch.Ranges(pr.Missing))
			}
			for _, s := range pr.Todo() {
				if err := pr.Bad[s]; err != nil {
					fmt.Fprintf(w, "not usable: shard %d: %v\n", s, err)
				}
			}
			if _, err := os.Stat(filepath.Join(p.Out, k.marker)); err == nil {
				fmt.Fprintf(w, "merged: %s\n", p.Out)
			} else if len(pr.Todo()) == 0 {
				fmt.Fprintf(w, "every shard is done: merge with \"desmear batch merge %s\"\n", args[0])
			}
			if err := w.Flush(); err != nil {
				return ioErr(err)
			}
			return nil
		},
	}
}

func newBatchMergeCommand(g *globalOptions) *cobra.Command {
	var force bool
	cmd := &cobra.Command{
		Use:   "merge DIR [--force]",
		Short: "Merge the shards of a plan into the validation folder, the response bundle or the result folder",
		Long: `merge checks that every shard of the plan in DIR is present and belongs to
the plan, merges their toys exactly and writes the validation folder of the
plan (DIR/validation unless planned with --out): the same files, bit for
bit, as "desmear validate" with the plan's settings. For a response plan it
merges the parts in shard order and writes the response bundle
(DIR/response unless planned with --out), the one "desmear response" writes.
For a plan of systematic variations (or of bootstrap replicas) it unfolds
the nominal data, adds the
shift of every variation from the shard files and writes the result folder
(the analysis file's output.folder unless planned with --out), the one
"desmear unfold ANALYSIS.yaml" writes.`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ctx, dir := cmd.Context(), args[0]
			j, err := loadJob(ctx, g, dir)
			if err != nil {
				return err
			}
			p := j.plan()
			if err := refused(kindOf(p.Kind).check(p.Out, force), p); err != nil {
				return err
			}
			return j.merge(ctx, g, dir, force)
		},
	}
	cmd.Flags().BoolVar(&force, "force", false, "replace the folder the merge writes if it holds an earlier one of its kind (or is empty)")
	return cmd
}
