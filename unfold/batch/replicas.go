package batch

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
)

// ensembleRecord is one ensemble in a shard file, its numbers written to
// read back bit for bit.
type ensembleRecord struct {
	N    int64 `json:"n"`
	Mean exact `json:"mean"`
	M2   exact `json:"m2"`
	Full bool  `json:"full"`
}

func recordOf(e *unfold.Ensemble) ensembleRecord {
	return ensembleRecord{N: e.N, Mean: exact(e.Mean), M2: exact(e.M2), Full: e.Full}
}

func (r ensembleRecord) ensemble() *unfold.Ensemble {
	return &unfold.Ensemble{N: r.N, Mean: []float64(r.Mean), M2: []float64(r.M2), Full: r.Full}
}

// replicaEnsemble is the ensembles of one replica unit in a shard file:
// of the estimates, and of each derived quantity (method.md §22).
type replicaEnsemble struct {
	Unit int `json:"unit"`
	ensembleRecord
	Derived []ensembleRecord `json:"derived,omitempty"`
}

// replicaFile is the file of one shard of a replicas plan.
type replicaFile struct {
	shardHead
	Units []replicaEnsemble `json:"units"`
}

func (f *replicaFile) members() int {
	n := 0
	for _, e := range f.Units {
		n += int(e.N)
	}
	return n
}

func (f *replicaFile) holds(p *Plan, s int, path string) error {
	sh := p.Shards[s]
	if len(f.Units) != sh.Units {
		return fmt.Errorf("%s: does not hold shard %d of the plan (replica units %d..%d)", path, s, sh.FirstUnit, sh.FirstUnit+sh.Units-1)
	}
	for i, e := range f.Units {
		u := p.Replicas[sh.FirstUnit+i]
		if e.Unit != u.Index || e.N != int64(u.Replicas) || len(e.Mean) == 0 {
			return fmt.Errorf("%s: does not hold replica unit %d (replicas %d..%d) of shard %d", path, u.Index, u.First, u.First+u.Replicas-1, s)
		}
	}
	return nil
}

// RunReplicas runs shard s of the replicas plan p: compute(u0, u1)
// computes the ensembles of the replica units u0 ≤ u < u1 (for example
// analysis.Nominal.Replicas, against the nominal unfolding made from the
// plan's inputs), written as the shard's file atomically. It does
// nothing and returns false when the shard's file exists and belongs to
// the plan; it returns true when it ran the shard.
func RunReplicas(ctx context.Context, dir string, p *Plan, s int, compute func(ctx context.Context, u0, u1 int) ([]analysis.ReplicaEnsembles, error)) (bool, error) {
	return runShard(ctx, dir, p, s, Replicas, func() (*replicaFile, error) {
		sh := p.Shards[s]
		es, err := compute(ctx, sh.FirstUnit, sh.FirstUnit+sh.Units)
		if err != nil {
			return nil, err
		}
		if len(es) != sh.Units {
			return nil, fmt.Errorf("batch: %d ensembles for the %d replica units of shard %d", len(es), sh.Units, s)
		}
		f := &replicaFile{}
		for i, e := range es {
			u := replicaEnsemble{Unit: sh.FirstUnit + i, ensembleRecord: recordOf(e.Estimate)}
			for _, d := range e.Derived {
				u.Derived = append(u.Derived, recordOf(d))
			}
			f.Units = append(f.Units, u)
		}
		return f, nil
	})
}

// MergeReplicas reads every shard of the replicas plan and returns the
// ensembles of all its replica units, in order (what
// analysis.Nominal.Finish takes). It is an error, listing the shards, if
// any is missing or does not belong to the plan.
func MergeReplicas(dir string, p *Plan) ([]analysis.ReplicaEnsembles, error) {
	var out []analysis.ReplicaEnsembles
	err := mergeShards(dir, p, Replicas, func(f *replicaFile) {
		for _, e := range f.Units {
			u := analysis.ReplicaEnsembles{Estimate: e.ensemble()}
			for _, d := range e.Derived {
				u.Derived = append(u.Derived, d.ensemble())
			}
			out = append(out, u)
		}
	})
	if err != nil {
		return nil, err
	}
	return out, nil
}
