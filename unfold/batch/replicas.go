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

// replicaPartial is the file of one shard of a replicas plan.
type replicaPartial struct {
	Format int               `json:"format"`
	Plan   string            `json:"plan"`
	Shard  int               `json:"shard"`
	Units  []replicaEnsemble `json:"units"`
}

// readReplicas reads the file of shard s of a replicas plan, as
// readShard does for toys.
func (p *Plan) readReplicas(dir string, s int) (*replicaPartial, error) {
	var pt replicaPartial
	path, err := p.readShardFile(dir, s, &pt, &pt.Format, &pt.Plan)
	if err != nil {
		return nil, err
	}
	sh := p.Shards[s]
	switch {
	case pt.Shard != s || len(pt.Units) != sh.Units:
		return nil, fmt.Errorf("%s: does not hold shard %d of the plan (replica units %d..%d)", path, s, sh.FirstUnit, sh.FirstUnit+sh.Units-1)
	}
	for i, e := range pt.Units {
		u := p.Replicas[sh.FirstUnit+i]
		if e.Unit != u.Index || e.N != int64(u.Replicas) || len(e.Mean) == 0 {
			return nil, fmt.Errorf("%s: does not hold replica unit %d (replicas %d..%d) of shard %d", path, u.Index, u.First, u.First+u.Replicas-1, s)
		}
	}
	return &pt, nil
}

// ReplicasDone reports whether shard s of the replicas plan is present
// and belongs to it (then running it again does nothing).
func (p *Plan) ReplicasDone(dir string, s int) bool {
	_, err := p.readReplicas(dir, s)
	return err == nil
}

// RunReplicas runs shard s of the replicas plan p: compute(u0, u1)
// computes the ensembles of the replica units u0 ≤ u < u1 (for example
// analysis.Nominal.Replicas, against the nominal unfolding made from the
// plan's inputs), written as the shard's file atomically. It does
// nothing and returns false when the shard's file exists and belongs to
// the plan; it returns true when it ran the shard.
func RunReplicas(ctx context.Context, dir string, p *Plan, s int, compute func(ctx context.Context, u0, u1 int) ([]analysis.ReplicaEnsembles, error)) (bool, error) {
	if s < 0 || s >= len(p.Shards) {
		return false, fmt.Errorf("batch: shard %d: the plan has shards 0..%d", s, len(p.Shards)-1)
	}
	if p.Kind != Replicas {
		return false, fmt.Errorf("batch: the plan is of %s, not of bootstrap replicas", p.Kind)
	}
	if p.ReplicasDone(dir, s) {
		return false, nil
	}
	sh := p.Shards[s]
	es, err := compute(ctx, sh.FirstUnit, sh.FirstUnit+sh.Units)
	if err != nil {
		return false, err
	}
	if len(es) != sh.Units {
		return false, fmt.Errorf("batch: %d ensembles for the %d replica units of shard %d", len(es), sh.Units, s)
	}
	pt := &replicaPartial{Format: Format, Plan: p.id, Shard: s}
	for i, e := range es {
		u := replicaEnsemble{Unit: sh.FirstUnit + i, ensembleRecord: recordOf(e.Estimate)}
		for _, d := range e.Derived {
			u.Derived = append(u.Derived, recordOf(d))
		}
		pt.Units = append(pt.Units, u)
	}
	return true, writeShardFile(ctx, dir, s, pt)
}

// MergeReplicas reads every shard of the replicas plan and returns the
// ensembles of all its replica units, in order (what
// analysis.Nominal.Finish takes). It is an error, listing the shards, if
// any is missing or does not belong to the plan.
func MergeReplicas(dir string, p *Plan) ([]analysis.ReplicaEnsembles, error) {
	if p.Kind != Replicas {
		return nil, fmt.Errorf("batch: the plan is of %s, not of bootstrap replicas", p.Kind)
	}
	if err := p.done(dir); err != nil {
		return nil, err
	}
	var out []analysis.ReplicaEnsembles
	for s := range p.Shards {
		pt, err := p.readReplicas(dir, s)
		if err != nil {
			return nil, err
		}
		for _, e := range pt.Units {
			u := analysis.ReplicaEnsembles{Estimate: e.ensemble()}
			for _, d := range e.Derived {
				u.Derived = append(u.Derived, d.ensemble())
			}
			out = append(out, u)
		}
	}
	return out, nil
}
