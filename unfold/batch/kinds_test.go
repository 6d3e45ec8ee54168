package batch

import (
	"context"
	"errors"
	"math"
	"os"
	"reflect"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/validate"
)

// shardKind is a kind of plan whose shards write files, in the tests
// over the kinds: its plan of three shards, a run of one shard and the
// merge, which returns the members it merged in order (toys: their
// number; variations: their names; replicas: the first number of each
// unit's mean, which the test's ensembles set to the unit's index).
type shardKind struct {
	kind  Kind
	plan  func(t *testing.T, dir string) *Plan
	run   func(ctx context.Context, dir string, p *Plan, s int) (bool, error)
	merge func(dir string, p *Plan) (any, error)
	// merged is what merge returns when every shard is done.
	merged any
}

// written writes p into dir and reads it back (a plan's identity is set
// by Read).
func written(t *testing.T, dir string, p *Plan, err error) *Plan {
	t.Helper()
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Write(dir); err != nil {
		t.Fatal(err)
	}
	q, err := Read(dir)
	if err != nil {
		t.Fatal(err)
	}
	return q
}

// variedNames are the variations of the tests' variations plans.
var variedNames = []string{"a", "b", "c", "d", "e"}

func shardKinds(t *testing.T) []shardKind {
	c := toyConfig(t, 5*validate.BlockToys+7)
	return []shardKind{
		{
			kind: Toys,
			plan: func(t *testing.T, dir string) *Plan { return plan(t, dir, c, 3) },
			run: func(ctx context.Context, dir string, p *Plan, s int) (bool, error) {
				return RunShard(ctx, dir, p, s, c)
			},
			merge: func(dir string, p *Plan) (any, error) {
				e, err := Merge(dir, p)
				if err != nil {
					return nil, err
				}
				return e.Toys(), nil
			},
			merged: c.Toys,
		},
		{
			kind: Variations,
			plan: func(t *testing.T, dir string) *Plan {
				p, err := VariationPlan(Input{Path: "analysis.yaml", SHA256: "a"}, "b", nil, variedNames, 3, dir+"/out")
				return written(t, dir, p, err)
			},
			// the estimates of variation k: k, and its pair −0 and NaN
			// (read back bit for bit: TestExactVector)
			run: func(ctx context.Context, dir string, p *Plan, s int) (bool, error) {
				return runShard(ctx, dir, p, s, Variations, func() (*variedFile, error) {
					first, count := p.MemberRange(s)
					f := &variedFile{FirstVariation: first}
					for k := first; k < first+count; k++ {
						f.Varied = append(f.Varied, variedEstimates{Name: p.Variations[k].Name, Estimates: []exact{{float64(k)}, {math.Copysign(0, -1), math.NaN()}}})
					}
					return f, ctx.Err()
				})
			},
			merge: func(dir string, p *Plan) (any, error) {
				vs, err := MergeVariations(dir, p)
				var names []string
				for k, v := range vs {
					if v.Estimates[0][0] != float64(k) || math.Signbit(v.Estimates[1][0]) != true || !math.IsNaN(v.Estimates[1][1]) {
						t.Errorf("variation %d read back as %v", k, v.Estimates)
					}
					names = append(names, v.Name)
				}
				return names, err
			},
			merged: variedNames,
		},
		{
			kind: Replicas,
			plan: func(t *testing.T, dir string) *Plan {
				p, err := ReplicaPlan(Input{Path: "analysis.yaml", SHA256: "a"}, "b", nil, 5*analysis.ReplicaUnit+7, 3, dir+"/out")
				return written(t, dir, p, err)
			},
			run: func(ctx context.Context, dir string, p *Plan, s int) (bool, error) {
				return RunReplicas(ctx, dir, p, s, func(ctx context.Context, u0, u1 int) ([]analysis.ReplicaEnsembles, error) {
					var es []analysis.ReplicaEnsembles
					for u := u0; u < u1; u++ {
						e := &unfold.Ensemble{N: int64(p.Replicas[u].Replicas), Mean: []float64{float64(u), 0.1}, M2: []float64{1, 2}}
						es = append(es, analysis.ReplicaEnsembles{Estimate: e})
					}
					return es, ctx.Err()
				})
			},
			merge: func(dir string, p *Plan) (any, error) {
				es, err := MergeReplicas(dir, p)
				var units []float64
				for _, e := range es {
					units = append(units, e.Estimate.Mean[0])
				}
				return units, err
			},
			merged: []float64{0, 1, 2, 3, 4, 5},
		},
	}
}

// TestShardFilesKinds: for every kind of plan whose shards write files,
// a finished shard is not run again (its file untouched), an interrupted
// shard leaves no file, Status counts the members of the shards done
// (Plan.MemberRange) and names a shard whose file holds another shard or
// belongs to another plan, the merge is refused listing the missing and
// foreign shards, a shard of another kind is not run, and once every
// shard is done the merge returns every member in order. (A shard file
// is complete or absent: the atomic outputs of DEVELOPERS.md.)
func TestShardFilesKinds(t *testing.T) {
	ctx := context.Background()
	kinds := shardKinds(t)
	for i, c := range kinds {
		t.Run(string(c.kind), func(t *testing.T) {
			dir := t.TempDir()
			p := c.plan(t, dir)
			if ran, err := c.run(ctx, dir, p, 1); err != nil || !ran || !p.ShardDone(dir, 1) {
				t.Fatalf("shard 1: ran %v, %v", ran, err)
			}
			st0, _ := os.Stat(ShardPath(dir, 1))
			if ran, err := c.run(ctx, dir, p, 1); err != nil || ran {
				t.Errorf("re-running a finished shard: ran %v, %v", ran, err)
			}
			if st1, _ := os.Stat(ShardPath(dir, 1)); !st1.ModTime().Equal(st0.ModTime()) {
				t.Error("re-running a finished shard rewrote its file")
			}
			cctx, cancel := context.WithCancel(ctx)
			cancel()
			if _, err := c.run(cctx, dir, p, 0); !errors.Is(err, context.Canceled) {
				t.Errorf("cancelled shard: %v", err)
			}
			if _, err := os.Stat(ShardPath(dir, 0)); !errors.Is(err, os.ErrNotExist) || p.ShardDone(dir, 0) {
				t.Errorf("a cancelled shard left a file: %v", err)
			}
			// shard 1's file as shard 2's
			b, _ := os.ReadFile(ShardPath(dir, 1))
			if err := os.WriteFile(ShardPath(dir, 2), b, 0o644); err != nil {
				t.Fatal(err)
			}
			pr, err := Status(dir, p)
			if err != nil {
				t.Fatal(err)
			}
			_, n1 := p.MemberRange(1)
			if !reflect.DeepEqual(pr.Done, []int{1}) || !reflect.DeepEqual(pr.Missing, []int{0}) || pr.MembersDone != n1 ||
				pr.Bad[2] == nil || !strings.Contains(pr.Bad[2].Error(), "does not hold shard 2") || !reflect.DeepEqual(pr.Todo(), []int{0, 2}) {
				t.Errorf("status: done %v missing %v members %d (want %d) bad %v", pr.Done, pr.Missing, pr.MembersDone, n1, pr.Bad)
			}
			// shard 2 of the same kind's plan in another folder: another
			// plan (another identity)
			other := t.TempDir()
			q := kinds[i].plan(t, other)
			if q.ID() == p.ID() {
				// the plans name other folders to merge into
				t.Fatalf("the plans of %s and %s have one identity", dir, other)
			}
			if _, err := c.run(ctx, other, q, 2); err != nil {
				t.Fatal(err)
			}
			b, _ = os.ReadFile(ShardPath(other, 2))
			if err := os.WriteFile(ShardPath(dir, 2), b, 0o644); err != nil {
				t.Fatal(err)
			}
			_, err = c.merge(dir, p)
			if err == nil || !strings.Contains(err.Error(), "missing: 0") || !strings.Contains(err.Error(), "belongs to another plan") {
				t.Errorf("merge with shards missing: %v", err)
			}
			// a shard of another kind
			o := kinds[(i+1)%len(kinds)]
			if _, err := o.run(ctx, dir, p, 0); err == nil || !strings.Contains(err.Error(), "not of "+o.kind.what()) {
				t.Errorf("a shard of %s run on a plan of %s: %v", o.kind, c.kind, err)
			}
			// the foreign shard 2 and the missing 0 are run for this plan
			for s := range p.Shards {
				if ran, err := c.run(ctx, dir, p, s); err != nil || ran != (s != 1) {
					t.Fatalf("shard %d: ran %v, %v", s, ran, err)
				}
			}
			got, err := c.merge(dir, p)
			if err != nil || !reflect.DeepEqual(got, c.merged) {
				t.Errorf("merged %v, %v; want %v", got, err, c.merged)
			}
			if pr, err := Status(dir, p); err != nil || pr.MembersDone != p.Members() || len(pr.Todo()) != 0 {
				t.Errorf("status when done: %+v, %v", pr, err)
			}
		})
	}
}

// TestMaxShards: for every kind with units, a plan of MaxShards shards
// is made and one more refused; the shards' members (Plan.MemberRange)
// are contiguous, in order and cover every member once, their numbers
// differing by at most one unit (common practice: the balanced block
// split, shard s holding units ⌊s·U/K⌋ to ⌊(s+1)·U/K⌋ − 1); the number
// of units is ⌈members / unit size⌉ (validate.BlockToys toys,
// analysis.ReplicaUnit replicas, one variation).
func TestMaxShards(t *testing.T) {
	names := func(n int) []string {
		v := make([]string, n)
		for i := range v {
			v[i] = string(rune('a' + i))
		}
		return v
	}
	for _, c := range []struct {
		kind    Kind
		members int
		units   int
		plan    func(shards int) (*Plan, error)
	}{
		{Toys, 520, 11, func(k int) (*Plan, error) { return ToyPlan(Input{}, "", ToySettings{Toys: 520}, k, "") }},
		{Toys, 500, 10, func(k int) (*Plan, error) { return ToyPlan(Input{}, "", ToySettings{Toys: 500}, k, "") }},
		{Variations, 7, 7, func(k int) (*Plan, error) { return VariationPlan(Input{}, "", nil, names(7), k, "") }},
		{Replicas, 120, 3, func(k int) (*Plan, error) { return ReplicaPlan(Input{}, "", nil, 120, k, "") }},
		{Replicas, 150, 3, func(k int) (*Plan, error) { return ReplicaPlan(Input{}, "", nil, 150, k, "") }},
	} {
		if m := MaxShards(c.kind, c.members); m != c.units {
			t.Errorf("%s of %d: MaxShards %d, want %d", c.kind, c.members, m, c.units)
		}
		if _, err := c.plan(c.units + 1); err == nil || !strings.Contains(err.Error(), "a shard holds at least one") {
			t.Errorf("%s of %d: %d shards: %v", c.kind, c.members, c.units+1, err)
		}
		if _, err := c.plan(0); err == nil {
			t.Errorf("%s of %d: 0 shards accepted", c.kind, c.members)
		}
		for k := 1; k <= c.units; k++ {
			p, err := c.plan(k)
			if err != nil {
				t.Fatalf("%s of %d in %d shards: %v", c.kind, c.members, k, err)
			}
			next, fewest, most := 0, math.MaxInt, 0
			for s := range p.Shards {
				first, count := p.MemberRange(s)
				if first != next || count < 1 {
					t.Errorf("%s of %d in %d shards: shard %d holds %d..%d after %d", c.kind, c.members, k, s, first, first+count-1, next)
				}
				next += count
				fewest, most = min(fewest, p.Shards[s].Units), max(most, p.Shards[s].Units)
			}
			if next != c.members || p.Members() != c.members || most-fewest > 1 {
				t.Errorf("%s of %d in %d shards: %d members, Members %d, units per shard %d..%d", c.kind, c.members, k, next, p.Members(), fewest, most)
			}
		}
	}
	if _, err := ResponsePlan(Input{}, 1000, ""); err != nil {
		t.Errorf("a response in 1000 parts: %v", err)
	}
}

// TestCheckInputs: every kind of plan refuses an analysis file of
// another SHA-256, and every kind but the response (whose plan names no
// problem) an assembled problem of another SHA-256 (ProblemSum).
func TestCheckInputs(t *testing.T) {
	in := Input{Path: "analysis.yaml", SHA256: "a"}
	for _, c := range []struct {
		plan    func() (*Plan, error)
		problem bool
	}{
		{func() (*Plan, error) { return ToyPlan(in, "b", ToySettings{Toys: 100}, 1, "") }, true},
		{func() (*Plan, error) { return ResponsePlan(in, 1, "") }, false},
		{func() (*Plan, error) { return VariationPlan(in, "b", nil, variedNames, 1, "") }, true},
		{func() (*Plan, error) { return ReplicaPlan(in, "b", nil, 100, 1, "") }, true},
	} {
		p, err := c.plan()
		if err != nil {
			t.Fatal(err)
		}
		if p.CheckAnalysis("a") != nil || p.CheckProblem("b") != nil {
			t.Errorf("%s: the plan's own inputs refused", p.Kind)
		}
		if err := p.CheckAnalysis("c"); err == nil || !strings.Contains(err.Error(), "analysis.yaml has changed") {
			t.Errorf("%s: another analysis file: %v", p.Kind, err)
		}
		if err := p.CheckProblem("c"); (err != nil) != c.problem {
			t.Errorf("%s: another problem: %v", p.Kind, err)
		}
	}
}
