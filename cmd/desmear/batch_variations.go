package main

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
)

// planVariations writes the plan of the systematic variations of the
// analysis at path, one unit per variation (an up/down pair is one).
func planVariations(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	var names []string
	check := func(a *analysis.Analysis) error {
		for _, v := range a.Variations {
			names = append(names, v.Name)
		}
		if len(names) == 0 {
			return usagef("%s has no systematic variations (no variations, no background scale_uncertainty): nothing to plan with --variations", path)
		}
		if most := batch.MaxShards(batch.Variations, len(names)); o.shards > most {
			return usagef("--shards %d: %s has %d systematic variations, and a shard holds at least one: give at most %d", o.shards, path, len(names), most)
		}
		return nil
	}
	return planNominal(ctx, g, o, path, check, func(in batch.Input, psum string, ins []batch.Input, out string) (*batch.Plan, error) {
		return batch.VariationPlan(in, psum, ins, names, o.shards, out)
	})
}

// variationJob is a plan of systematic variations.
type variationJob struct{ nominalJob }

func loadVariationJob(ctx context.Context, g *globalOptions, p *batch.Plan) (shardJob, error) {
	j, err := loadNominalJob(p)
	return &variationJob{j}, err
}

// run unfolds the variations of shard s.
func (j *variationJob) run(ctx context.Context, g *globalOptions, dir string, s int) (string, error) {
	err := j.runNominal(ctx, s, func(n *analysis.Nominal) (bool, error) { return batch.RunVariations(ctx, dir, j.p, s, n) })
	first, count := j.p.MemberRange(s)
	return fmt.Sprintf("%s: %s..%s", memberRange(j.p, s), j.p.Variations[first].Name, j.p.Variations[first+count-1].Name), err
}

// merge adds the shifts of the variations of the shards to the nominal
// result (the bootstrap replicas of uncertainty.replicas, if any,
// computed here).
func (j *variationJob) merge(ctx context.Context, g *globalOptions, dir string, force bool) error {
	varied, err := batch.MergeVariations(dir, j.p)
	if err != nil {
		return mergeErr(err, dir)
	}
	return j.finish(ctx, g, func(ctx context.Context, a *analysis.Analysis, n *analysis.Nominal) (*analysis.Outcome, error) {
		replicas, err := n.Replicas(ctx, 0, n.ReplicaUnits())
		if err != nil {
			return nil, err
		}
		return n.Finish(ctx, replicas, varied, force)
	})
}
