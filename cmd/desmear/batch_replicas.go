package main

import (
	"bufio"
	"context"
	"errors"
	"fmt"
	"path/filepath"
	"sync"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
	"github.com/desmear/desmear/unfold/result"
)

// planReplicas writes the plan of the bootstrap replicas of the analysis
// at path (uncertainty.replicas, which must be n), in units of
// analysis.ReplicaUnit, the nominal unfolding done once here for the
// sums of its inputs.
func planReplicas(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	abs, err := filepath.Abs(path)
	if err != nil {
		return ioErr(err)
	}
	a, err := analysis.Load(abs)
	if err != nil {
		return analysisErr(err)
	}
	if have := a.Uncertainty.Replicas; have != o.replicas {
		if have == 0 {
			return usagef("--replicas %d: %s asks for no bootstrap replicas (uncertainty.replicas): set uncertainty.replicas: %d in it, so that the merge writes the result \"desmear unfold\" writes", o.replicas, path, o.replicas)
		}
		return usagef("--replicas %d: %s asks for %d bootstrap replicas (uncertainty.replicas): plan with --replicas %d, or change the file", o.replicas, path, have, have)
	}
	nu := (o.replicas + analysis.ReplicaUnit - 1) / analysis.ReplicaUnit
	if o.shards > nu {
		return usagef("--shards %d: %d bootstrap replicas are %d units of up to %d, and a shard holds at least one: give at most %d", o.shards, o.replicas, nu, analysis.ReplicaUnit, nu)
	}
	out := a.Output.Folder
	if o.out != "" {
		out = o.out
	}
	if out, err = filepath.Abs(out); err != nil {
		return ioErr(err)
	}
	n, err := nominalWith(ctx, a, &analysis.Options{Version: version})
	if err != nil {
		return err
	}
	asum, err := batch.FileSum(abs)
	if err != nil {
		return inputErr(err)
	}
	psum, ins, err := nominalSums(n)
	if err != nil {
		return err
	}
	p, err := batch.ReplicaPlan(batch.Input{Path: abs, SHA256: asum}, psum, ins, o.replicas, o.shards, out)
	if err != nil {
		return usageErr(fmt.Errorf("--shards %d: %w", o.shards, err))
	}
	if err := p.Write(o.workdir); err != nil {
		return ioErr(err)
	}
	fmt.Fprintf(g.stdout, "plan: %s (%d bootstrap replicas in %d units of up to %d, %d shards); the merge writes %s\n",
		filepath.Join(o.workdir, batch.PlanFile), o.replicas, len(p.Replicas), analysis.ReplicaUnit, len(p.Shards), out)
	return nil
}

// replicaJob is a plan of bootstrap replicas whose analysis file is the
// plan's. Each shard unfolds the nominal data again (in its own process
// on a cluster), and checks its inputs against the plan.
type replicaJob struct {
	variationJob // the same checks of the inputs
}

func loadReplicaJob(p *batch.Plan) (*replicaJob, error) {
	j, err := loadVariationJob(p)
	if err != nil {
		return nil, err
	}
	return &replicaJob{*j}, nil
}

// runShard computes the replica units of shard s, unless it is done.
func (j *replicaJob) runShard(ctx context.Context, g *globalOptions, dir string, s int, mu *sync.Mutex) error {
	say := func(format string, a ...any) {
		if !g.quiet {
			mu.Lock()
			defer mu.Unlock()
			fmt.Fprintf(g.stderr, format, a...)
		}
	}
	if j.plan.ReplicasDone(dir, s) {
		say("desmear: shard %d was done already\n", s)
		return nil
	}
	_, n, err := j.nominal(ctx, &analysis.Options{Version: version})
	if err != nil {
		return err
	}
	if _, err := batch.RunReplicas(ctx, dir, j.plan, s, n.Replicas); err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return analysisErr(fmt.Errorf("shard %d: %w", s, err))
	}
	sh := j.plan.Shards[s]
	first, last := j.plan.Replicas[sh.FirstUnit], j.plan.Replicas[sh.FirstUnit+sh.Units-1]
	say("desmear: shard %d (replicas %d..%d) done\n", s, first.First, last.First+last.Replicas-1)
	return nil
}

// mergeReplicas merges the shards of the replicas plan p into the result
// folder "desmear unfold ANALYSIS.yaml" writes (the systematic
// variations, if any, unfolded here).
func mergeReplicas(ctx context.Context, g *globalOptions, p *batch.Plan, dir string, force bool) error {
	j, err := loadReplicaJob(p)
	if err != nil {
		return err
	}
	if err := refusedFolder(result.Check(p.Out, force), p.Out, "result folder", result.JSONFile); err != nil {
		return err
	}
	replicas, err := batch.MergeReplicas(dir, p)
	if err != nil {
		return inputErr(fmt.Errorf("%w (\"desmear batch status %s\" lists them)", err, dir))
	}
	return j.finish(ctx, g, func(ctx context.Context, a *analysis.Analysis, n *analysis.Nominal) (*analysis.Outcome, error) {
		varied := make([]*analysis.Varied, len(a.Variations))
		for k := range a.Variations {
			var err error
			if varied[k], err = n.Vary(ctx, k); err != nil {
				return nil, err
			}
		}
		return n.Finish(ctx, replicas, varied, force)
	})
}

// finish unfolds the nominal data of the plan's analysis (with a
// progress bar), runs done on it to write the result folder of the plan
// and prints what "desmear unfold ANALYSIS.yaml" prints.
func (j *variationJob) finish(ctx context.Context, g *globalOptions, done func(context.Context, *analysis.Analysis, *analysis.Nominal) (*analysis.Outcome, error)) error {
	p := j.plan
	pr := newProgress(g)
	defer pr.finish()
	a, n, err := j.nominal(ctx, &analysis.Options{Version: version, Progress: pr.report})
	if err != nil {
		return err
	}
	a.Output.Folder = p.Out
	out, err := done(ctx, a, n)
	pr.finish()
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		if errors.Is(err, result.ErrExists) || errors.Is(err, result.ErrNotResult) {
			return refusedFolder(err, p.Out, "result folder", result.JSONFile)
		}
		return analysisErr(err)
	}
	printRemedies(g, out.Remedies, a.Reco.Label, a.Truth.Label)
	printWarnings(g, out.Warnings)
	if !g.quiet {
		for _, n := range out.Notes {
			fmt.Fprintf(g.stderr, "note: %s\n", n)
		}
	}
	w := bufio.NewWriter(g.stdout)
	printOutcome(w, a, out)
	printChecks(w, out.Folder, out.Document, out.Files)
	if err := w.Flush(); err != nil {
		return ioErr(err)
	}
	printBinNotes(g, out.Document, a.Truth, "uncertainty.method: toys")
	return nil
}
