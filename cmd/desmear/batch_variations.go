package main

import (
	"context"
	"fmt"
	"path/filepath"
	"sync"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
	"github.com/desmear/desmear/unfold/result"
)

// planVariations writes the plan of the systematic variations of the
// analysis at path, one unit per variation (an up/down pair is one), the
// nominal unfolding done once here for the sums of its inputs.
func planVariations(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	abs, err := filepath.Abs(path)
	if err != nil {
		return ioErr(err)
	}
	a, err := analysis.Load(abs)
	if err != nil {
		return analysisErr(err)
	}
	out := a.Output.Folder
	if o.out != "" {
		out = o.out
	}
	if out, err = filepath.Abs(out); err != nil {
		return ioErr(err)
	}
	var names []string
	for _, v := range a.Variations {
		names = append(names, v.Name)
	}
	if len(names) == 0 {
		return usagef("%s has no systematic variations (no variations, no background scale_uncertainty): nothing to plan with --variations", path)
	}
	if o.shards > len(names) {
		return usagef("--shards %d: %s has %d systematic variations, and a shard holds at least one: give at most %d", o.shards, path, len(names), len(names))
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
	p, err := batch.VariationPlan(batch.Input{Path: abs, SHA256: asum}, psum, ins, names, o.shards, out)
	if err != nil {
		return usageErr(fmt.Errorf("--shards %d: %w", o.shards, err))
	}
	if err := p.Write(o.workdir); err != nil {
		return ioErr(err)
	}
	fmt.Fprintf(g.stdout, "plan: %s (%d systematic variations in %d shards); the merge writes %s\n", filepath.Join(o.workdir, batch.PlanFile), len(names), len(p.Shards), out)
	return nil
}

// nominalWith unfolds the nominal data of the analysis a, as "desmear
// unfold ANALYSIS.yaml" does before its variations.
func nominalWith(ctx context.Context, a *analysis.Analysis, opt *analysis.Options) (*analysis.Nominal, error) {
	n, err := a.Nominal(ctx, opt)
	if err != nil {
		if ctx.Err() != nil {
			return nil, ctx.Err()
		}
		return nil, analysisErr(err)
	}
	return n, nil
}

// nominalSums returns the sum of the nominal problem and every input of
// the analysis by content.
func nominalSums(n *analysis.Nominal) (string, []batch.Input, error) {
	psum, err := batch.ProblemSum(n.Problem())
	if err != nil {
		return "", nil, inputErr(err)
	}
	fs, err := n.Inputs()
	if err != nil {
		return "", nil, inputErr(err)
	}
	ins := make([]batch.Input, len(fs))
	for i, f := range fs {
		ins[i] = batch.Input{Path: f.Path, SHA256: f.SHA256}
	}
	return psum, ins, nil
}

// variationJob is a plan of systematic variations whose analysis file is
// the plan's. Each shard unfolds the nominal data again (in its own
// process on a cluster), and checks its inputs against the plan.
type variationJob struct {
	plan *batch.Plan
}

func loadVariationJob(p *batch.Plan) (*variationJob, error) {
	asum, err := batch.FileSum(p.Analysis.Path)
	if err != nil {
		return nil, inputErr(fmt.Errorf("the plan's analysis file: %w", err))
	}
	// The analysis file first, before anything is unfolded: the
	// problem's sum is checked once it is assembled.
	if err := p.CheckInputs(asum, p.Problem); err != nil {
		return nil, inputErr(err)
	}
	return &variationJob{plan: p}, nil
}

// nominal loads the plan's analysis, unfolds the nominal data (with the
// options opt) and checks the inputs against the plan.
func (j *variationJob) nominal(ctx context.Context, opt *analysis.Options) (*analysis.Analysis, *analysis.Nominal, error) {
	a, err := analysis.Load(j.plan.Analysis.Path)
	if err != nil {
		return nil, nil, analysisErr(err)
	}
	n, err := nominalWith(ctx, a, opt)
	if err != nil {
		return nil, nil, err
	}
	psum, ins, err := nominalSums(n)
	if err != nil {
		return nil, nil, err
	}
	if err := j.plan.CheckInputs(j.plan.Analysis.SHA256, psum); err != nil {
		return nil, nil, inputErr(err)
	}
	if err := j.plan.CheckFiles(ins); err != nil {
		return nil, nil, inputErr(err)
	}
	return a, n, nil
}

func (j *variationJob) shards() int { return len(j.plan.Shards) }

// runShard unfolds the variations of shard s, unless it is done.
func (j *variationJob) runShard(ctx context.Context, g *globalOptions, dir string, s int, mu *sync.Mutex) error {
	say := func(format string, a ...any) {
		if !g.quiet {
			mu.Lock()
			defer mu.Unlock()
			fmt.Fprintf(g.stderr, format, a...)
		}
	}
	first, count := j.plan.VariationRange(s)
	if j.plan.VariedDone(dir, s) {
		say("desmear: shard %d was done already\n", s)
		return nil
	}
	_, n, err := j.nominal(ctx, &analysis.Options{Version: version})
	if err != nil {
		return err
	}
	if _, err := batch.RunVariations(ctx, dir, j.plan, s, n); err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return analysisErr(fmt.Errorf("shard %d: %w", s, err))
	}
	say("desmear: shard %d (variations %d..%d: %s..%s) done\n", s, first, first+count-1, j.plan.Variations[first].Name, j.plan.Variations[first+count-1].Name)
	return nil
}

// mergeVariations merges the shards of the variations plan p into the
// result folder "desmear unfold ANALYSIS.yaml" writes.
func mergeVariations(ctx context.Context, g *globalOptions, p *batch.Plan, dir string, force bool) error {
	j, err := loadVariationJob(p)
	if err != nil {
		return err
	}
	if err := refusedFolder(result.Check(p.Out, force), p.Out, "result folder", result.JSONFile); err != nil {
		return err
	}
	varied, err := batch.MergeVariations(dir, p)
	if err != nil {
		return inputErr(fmt.Errorf("%w (\"desmear batch status %s\" lists them)", err, dir))
	}
	return j.finish(ctx, g, func(ctx context.Context, a *analysis.Analysis, n *analysis.Nominal) (*analysis.Outcome, error) {
		// The bootstrap replicas of uncertainty.replicas, if any, here.
		replicas, err := n.Replicas(ctx, 0, n.ReplicaUnits())
		if err != nil {
			return nil, err
		}
		return n.Finish(ctx, replicas, varied, force)
	})
}
