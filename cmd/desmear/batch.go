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
	kinds := 0
	for _, set := range []bool{cmd.Flags().Changed("toys"), cmd.Flags().Changed("replicas"), o.variations, o.response} {
		if set {
			kinds++
		}
	}
	switch {
	case kinds != 1:
		return usagef("batch plan needs one of --toys N, --response, --replicas N or --variations")
	case o.workdir == "":
		return usagef("batch plan needs --workdir DIR")
	case o.shards < 1:
		return usagef("--shards %d: give at least 1", o.shards)
	case o.response || o.variations || cmd.Flags().Changed("replicas"):
		what := "--response"
		switch {
		case o.variations:
			what = "--variations"
		case cmd.Flags().Changed("replicas"):
			what = "--replicas"
		}
		for _, name := range []string{"toy-truth", "max-iterations", "criterion", "bias-threshold", "tilt", "seed"} {
			if cmd.Flags().Changed(name) {
				return usagef("--%s is an option of a toy ensemble (--toys N), not of %s", name, what)
			}
		}
		switch {
		case o.response:
			return planResponse(g, o, path)
		case o.variations:
			return planVariations(cmd.Context(), g, o, path)
		case o.replicas < 2:
			return usagef("--replicas %d: give at least 2", o.replicas)
		}
		return planReplicas(cmd.Context(), g, o, path)
	case o.toys < 2:
		return usagef("--toys %d: give at least 2", o.toys)
	case o.maxK < 1:
		return usagef("--max-iterations %d: give at least 1", o.maxK)
	case !(o.tilt >= 0 && o.tilt < 100):
		return usagef("--tilt %v: give a size in [0, 100) percent", o.tilt)
	case !(o.threshold > 0):
		return usagef("--bias-threshold %v: give a number > 0", o.threshold)
	}
	abs, err := filepath.Abs(path)
	if err != nil {
		return ioErr(err)
	}
	out := o.out
	if out == "" {
		out = filepath.Join(o.workdir, "validation")
	}
	if out, err = filepath.Abs(out); err != nil {
		return ioErr(err)
	}
	ctx := cmd.Context()
	v, err := loadValidationAnalysis(ctx, g, abs)
	if err != nil {
		return err
	}
	if _, err := v.options(&o.validateOptions); err != nil {
		return err
	}
	asum, err := batch.FileSum(abs)
	if err != nil {
		return inputErr(err)
	}
	psum, err := batch.ProblemSum(v.prob)
	if err != nil {
		return inputErr(err)
	}
	ts := batch.ToySettings{Toys: o.toys, MaxIterations: o.maxK, Seed: o.seed, Truth: o.toyTruth, Criterion: o.criterion, BiasThreshold: o.threshold, TiltPercent: o.tilt}
	p, err := batch.ToyPlan(batch.Input{Path: abs, SHA256: asum}, psum, ts, o.shards, out)
	if err != nil {
		return usageErr(fmt.Errorf("--shards %d: %w", o.shards, err))
	}
	if err := p.Write(o.workdir); err != nil {
		return ioErr(err)
	}
	fmt.Fprintf(g.stdout, "plan: %s (%d toys in %d units of up to %d, %d shards); the merge writes %s\n",
		filepath.Join(o.workdir, batch.PlanFile), o.toys, len(p.Units), validate.BlockToys, len(p.Shards), out)
	return nil
}

// planResponse writes the plan of a response built in parts.
func planResponse(g *globalOptions, o *batchPlanOptions, path string) error {
	abs, err := filepath.Abs(path)
	if err != nil {
		return ioErr(err)
	}
	if _, err := analysis.Load(abs); err != nil {
		return analysisErr(err)
	}
	out := o.out
	if out == "" {
		out = filepath.Join(o.workdir, "response")
	}
	if out, err = filepath.Abs(out); err != nil {
		return ioErr(err)
	}
	asum, err := batch.FileSum(abs)
	if err != nil {
		return inputErr(err)
	}
	p, err := batch.ResponsePlan(batch.Input{Path: abs, SHA256: asum}, o.shards, out)
	if err != nil {
		return usageErr(fmt.Errorf("--shards %d: %w", o.shards, err))
	}
	if err := p.Write(o.workdir); err != nil {
		return ioErr(err)
	}
	fmt.Fprintf(g.stdout, "plan: %s (the response in %d parts); the merge writes %s\n", filepath.Join(o.workdir, batch.PlanFile), len(p.Shards), out)
	return nil
}

// shardJob is a plan ready to run its shards.
type shardJob interface {
	shards() int
	runShard(ctx context.Context, g *globalOptions, dir string, s int, mu *sync.Mutex) error
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
	switch p.Kind {
	case batch.Response:
		return loadResponseJob(p)
	case batch.Variations:
		return loadVariationJob(p)
	case batch.Replicas:
		return loadReplicaJob(p)
	}
	return loadToyJob(ctx, g, p)
}

// responseJob is a response plan with its analysis loaded.
type responseJob struct {
	plan *batch.Plan
	a    *analysis.Analysis
}

func loadResponseJob(p *batch.Plan) (*responseJob, error) {
	asum, err := batch.FileSum(p.Analysis.Path)
	if err != nil {
		return nil, inputErr(fmt.Errorf("the plan's analysis file: %w", err))
	}
	if err := p.CheckInputs(asum, ""); err != nil {
		return nil, inputErr(err)
	}
	a, err := analysis.Load(p.Analysis.Path)
	if err != nil {
		return nil, analysisErr(err)
	}
	return &responseJob{plan: p, a: a}, nil
}

func (j *responseJob) shards() int { return len(j.plan.Shards) }

// runShard builds response part s, unless it is done.
func (j *responseJob) runShard(ctx context.Context, g *globalOptions, dir string, s int, mu *sync.Mutex) error {
	say := func(format string, a ...any) {
		if !g.quiet {
			mu.Lock()
			defer mu.Unlock()
			fmt.Fprintf(g.stderr, format, a...)
		}
	}
	if j.plan.PartDone(dir, s) {
		say("desmear: response part %d was done already\n", s)
		return nil
	}
	part, err := j.a.BuildPart(ctx, s, len(j.plan.Shards), &analysis.Options{Version: version, ShardEvents: shardEvents})
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return analysisErr(err)
	}
	if err := os.MkdirAll(filepath.Join(dir, batch.PartDir), 0o755); err != nil {
		return ioErr(err)
	}
	// replace a part of another plan or a damaged one
	if err := part.Save(batch.PartPath(dir, s), true); err != nil {
		return refusedFolder(err, batch.PartPath(dir, s), "response part", "part.json")
	}
	say("desmear: response part %d (%d shards) done\n", s, len(part.Numbers))
	return nil
}

// toyJob is a plan with its validation set up: the inputs checked
// against the plan, the nominal result and the toys' configuration.
type toyJob struct {
	plan  *batch.Plan
	v     *validation
	setup *validate.Setup
}

// loadToyJob sets the validation of the toy plan p up.
func loadToyJob(ctx context.Context, g *globalOptions, p *batch.Plan) (*toyJob, error) {
	asum, err := batch.FileSum(p.Analysis.Path)
	if err != nil {
		return nil, inputErr(fmt.Errorf("the plan's analysis file: %w", err))
	}
	v, err := loadValidationAnalysis(ctx, g, p.Analysis.Path)
	if err != nil {
		return nil, err
	}
	psum, err := batch.ProblemSum(v.prob)
	if err != nil {
		return nil, inputErr(err)
	}
	if err := p.CheckInputs(asum, psum); err != nil {
		return nil, inputErr(err)
	}
	t := p.Toys
	vo := &validateOptions{toys: t.Toys, maxK: t.MaxIterations, criterion: t.Criterion, threshold: t.BiasThreshold, tilt: t.TiltPercent, toyTruth: t.Truth}
	vo.seed = t.Seed
	opt, err := v.options(vo)
	if err != nil {
		return nil, err
	}
	st, err := validate.NewSetup(ctx, v.prob, v.settings, opt)
	if err != nil {
		return nil, v.locate(err)
	}
	return &toyJob{plan: p, v: v, setup: st}, nil
}

func (j *toyJob) shards() int { return len(j.plan.Shards) }

// runShard runs shard s of the job and says so on stderr.
func (j *toyJob) runShard(ctx context.Context, g *globalOptions, dir string, s int, mu *sync.Mutex) error {
	ran, err := batch.RunShard(ctx, dir, j.plan, s, &j.setup.Config)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return j.v.locate(fmt.Errorf("shard %d: %w", s, err))
	}
	if !g.quiet {
		mu.Lock()
		defer mu.Unlock()
		first, count := j.plan.ToyRange(s)
		if ran {
			fmt.Fprintf(g.stderr, "desmear: shard %d (toys %d..%d) done\n", s, first, first+count-1)
		} else {
			fmt.Fprintf(g.stderr, "desmear: shard %d was done already\n", s)
		}
	}
	return nil
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
			if shard < 0 || shard >= j.shards() {
				return usagef("--shard %d: the plan has shards 0..%d", shard, j.shards()-1)
			}
			return j.runShard(cmd.Context(), g, args[0], shard, &sync.Mutex{})
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
			errs := make([]error, j.shards())
			var wg sync.WaitGroup
			for range min(jobs, j.shards()) {
				wg.Go(func() {
					for s := range next {
						errs[s] = j.runShard(ctx, g, dir, s, &mu)
					}
				})
			}
			for s := range j.shards() {
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
			w := bufio.NewWriter(g.stdout)
			marker := validate.JSONFile
			switch p.Kind {
			case batch.Response:
				marker = response.BundleFiles()[0]
				fmt.Fprintf(w, "plan: %s (the response in %d parts)\n", filepath.Join(args[0], batch.PlanFile), len(p.Shards))
				fmt.Fprintf(w, "done: %d of %d shards\n", len(pr.Done), len(p.Shards))
			case batch.Variations:
				marker = result.JSONFile
				fmt.Fprintf(w, "plan: %s (%d systematic variations in %d shards)\n", filepath.Join(args[0], batch.PlanFile), len(p.Variations), len(p.Shards))
				fmt.Fprintf(w, "done: %d of %d shards (%d of %d variations)\n", len(pr.Done), len(p.Shards), pr.VariationsDone, len(p.Variations))
			case batch.Replicas:
				marker = result.JSONFile
				fmt.Fprintf(w, "plan: %s (%d bootstrap replicas in %d shards)\n", filepath.Join(args[0], batch.PlanFile), p.ReplicaCount(), len(p.Shards))
				fmt.Fprintf(w, "done: %d of %d shards (%d of %d replicas)\n", len(pr.Done), len(p.Shards), pr.ReplicasDone, p.ReplicaCount())
			default:
				fmt.Fprintf(w, "plan: %s (%s: %d toys in %d shards)\n", filepath.Join(args[0], batch.PlanFile), p.Kind, p.Toys.Toys, len(p.Shards))
				fmt.Fprintf(w, "done: %d of %d shards (%d of %d toys)\n", len(pr.Done), len(p.Shards), pr.ToysDone, p.Toys.Toys)
			}
			if len(pr.Missing) > 0 {
				fmt.Fprintf(w, "missing: %s\n", batch.Ranges(pr.Missing))
			}
			for _, s := range pr.Todo() {
				if err := pr.Bad[s]; err != nil {
					fmt.Fprintf(w, "not usable: shard %d: %v\n", s, err)
				}
			}
			if _, err := os.Stat(filepath.Join(p.Out, marker)); err == nil {
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
			p, err := readPlan(dir)
			if err != nil {
				return err
			}
			switch p.Kind {
			case batch.Response:
				return mergeResponse(g, p, dir, force)
			case batch.Variations:
				return mergeVariations(ctx, g, p, dir, force)
			case batch.Replicas:
				return mergeReplicas(ctx, g, p, dir, force)
			}
			j, err := loadToyJob(ctx, g, p)
			if err != nil {
				return err
			}
			out := j.plan.Out
			if err := refusedFolder(validate.CheckFolder(out, force), out, "validation folder", validate.JSONFile); err != nil {
				return err
			}
			e, err := batch.Merge(dir, j.plan)
			if err != nil {
				return inputErr(fmt.Errorf("%w (\"desmear batch status %s\" lists them)", err, dir))
			}
			rep, err := j.setup.Report(ctx, e)
			if err != nil {
				if ctx.Err() != nil {
					return ctx.Err()
				}
				return j.v.locate(err)
			}
			j.v.label(rep)
			if err := validate.WriteFolder(out, force, validate.Program{Name: "desmear", Version: version}, rep); err != nil {
				if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
					return refusedFolder(err, out, "validation folder", validate.JSONFile)
				}
				return ioErr(fmt.Errorf("writing %s: %w", out, err))
			}
			w := bufio.NewWriter(g.stdout)
			printValidation(w, out, rep)
			if err := w.Flush(); err != nil {
				return ioErr(err)
			}
			return nil
		},
	}
	cmd.Flags().BoolVar(&force, "force", false, "replace the folder the merge writes if it holds an earlier one of its kind (or is empty)")
	return cmd
}

// mergeResponse merges the response parts of plan p into its bundle.
func mergeResponse(g *globalOptions, p *batch.Plan, dir string, force bool) error {
	marker := response.BundleFiles()[0]
	if err := refusedFolder(response.CheckBundle(p.Out, force), p.Out, "response bundle", marker); err != nil {
		return err
	}
	if _, err := loadResponseJob(p); err != nil {
		return err
	}
	r, info, err := batch.MergeResponse(dir, p)
	if err != nil {
		return inputErr(fmt.Errorf("%w (\"desmear batch status %s\" lists them)", err, dir))
	}
	if err := r.Save(p.Out, *info, force); err != nil {
		return refusedFolder(err, p.Out, "response bundle", marker)
	}
	w := bufio.NewWriter(g.stdout)
	fmt.Fprintf(w, "response: %s (%d shards from %d parts)\n", p.Out, len(info.Shards), len(p.Shards))
	printResponseCounts(w, r)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	return nil
}
