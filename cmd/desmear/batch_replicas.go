package main

import (
	"context"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/batch"
)

// planReplicas writes the plan of the bootstrap replicas of the analysis
// at path (uncertainty.replicas, which must be o.replicas), in units of
// analysis.ReplicaUnit.
func planReplicas(ctx context.Context, g *globalOptions, o *batchPlanOptions, path string) error {
	if o.replicas < 2 {
		return usagef("--replicas %d: give at least 2", o.replicas)
	}
	check := func(a *analysis.Analysis) error {
		if have := a.Uncertainty.Replicas; have != o.replicas {
			if have == 0 {
				return usagef("--replicas %d: %s asks for no bootstrap replicas (uncertainty.replicas): set uncertainty.replicas: %d in it, so that the merge writes the result \"desmear unfold\" writes", o.replicas, path, o.replicas)
			}
			return usagef("--replicas %d: %s asks for %d bootstrap replicas (uncertainty.replicas): plan with --replicas %d, or change the file", o.replicas, path, have, have)
		}
		if most := batch.MaxShards(batch.Replicas, o.replicas); o.shards > most {
			return usagef("--shards %d: %d bootstrap replicas are %d units of up to %d, and a shard holds at least one: give at most %d", o.shards, o.replicas, most, analysis.ReplicaUnit, most)
		}
		return nil
	}
	return planNominal(ctx, g, o, path, check, func(in batch.Input, psum string, ins []batch.Input, out string) (*batch.Plan, error) {
		return batch.ReplicaPlan(in, psum, ins, o.replicas, o.shards, out)
	})
}

// replicaJob is a plan of bootstrap replicas.
type replicaJob struct{ nominalJob }

func loadReplicaJob(ctx context.Context, g *globalOptions, p *batch.Plan) (shardJob, error) {
	j, err := loadNominalJob(p)
	return &replicaJob{j}, err
}

// run computes the ensembles of the replica units of shard s.
func (j *replicaJob) run(ctx context.Context, g *globalOptions, dir string, s int) (string, error) {
	err := j.runNominal(ctx, s, func(n *analysis.Nominal) (bool, error) { return batch.RunReplicas(ctx, dir, j.p, s, n.Replicas) })
	return memberRange(j.p, s), err
}

// merge merges the ensembles of the shards' replica units in order into
// the nominal result (the systematic variations, if any, unfolded here).
func (j *replicaJob) merge(ctx context.Context, g *globalOptions, dir string, force bool) error {
	replicas, err := batch.MergeReplicas(dir, j.p)
	if err != nil {
		return mergeErr(err, dir)
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
