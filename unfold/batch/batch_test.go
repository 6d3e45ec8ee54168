package batch

import (
	"context"
	"encoding/json"
	"math"
	"math/rand/v2"
	"reflect"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/validate"
)

// smallProblem: three truth bins migrating into four reco bins.
func smallProblem(t *testing.T) *unfold.Problem {
	t.Helper()
	// columns (truth) of A, CSC
	colPtr := []int{0, 2, 5, 7}
	rowIdx := []int{0, 1, 0, 1, 2, 2, 3}
	val := []float64{600, 150, 100, 500, 120, 200, 350}
	m, err := sparse.NewMatrix(4, 3, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return &unfold.Problem{Migrations: m, Generated: []float64{1000, 900, 700}, Data: []float64{700, 640, 330, 350}}
}

func iterations(k int) unfold.Method { return &bayes.Settings{Iterations: k} }

func toyConfig(t *testing.T, toys int) *validate.Config {
	return &validate.Config{Problem: smallProblem(t), Method: iterations, MaxK: 3, Truth: []float64{900, 850, 650}, Toys: toys, Seed: 7}
}

func plan(t *testing.T, dir string, c *validate.Config, shards int) *Plan {
	t.Helper()
	sum, err := ProblemSum(c.Problem)
	if err != nil {
		t.Fatal(err)
	}
	p, err := ToyPlan(Input{Path: "analysis.yaml", SHA256: "a"}, sum, ToySettings{Toys: c.Toys, MaxIterations: c.MaxK, Seed: c.Seed}, shards, dir+"/out")
	if err != nil {
		t.Fatal(err)
	}
	if err := p.Write(dir); err != nil {
		t.Fatal(err)
	}
	if p, err = Read(dir); err != nil {
		t.Fatal(err)
	}
	return p
}

// TestMergeEqualsOneRun: the toys of a plan run shard by shard and merged
// are the ensemble of one run over every toy, bit for bit, for 1, 2, 7 and
// 64 shards (the reference is validate.Run over all toys in one process;
// the determinism rule of DEVELOPERS.md: the same bits for any work
// split). The toy count leaves the last unit short.
func TestMergeEqualsOneRun(t *testing.T) {
	ctx := context.Background()
	c := toyConfig(t, 64*validate.BlockToys+17)
	one, err := validate.Run(ctx, c, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, k := range []int{1, 2, 7, 64} {
		dir := t.TempDir()
		p := plan(t, dir, c, k)
		// run the shards in reverse: the order must not matter
		for s := k - 1; s >= 0; s-- {
			if ran, err := RunShard(ctx, dir, p, s, c); err != nil || !ran {
				t.Fatalf("K=%d shard %d: ran %v, %v", k, s, ran, err)
			}
		}
		e, err := Merge(dir, p)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(e, one) {
			t.Errorf("K=%d: the merged ensemble differs from one run", k)
		}
		if !reflect.DeepEqual(e.Scan(), one.Scan()) {
			t.Errorf("K=%d: the merged scan differs from one run", k)
		}
	}
}

// TestPlanUnits: the units are blocks of validate.BlockToys toys with
// their stream derivation, shard s holding units floor(s·U/K) to
// floor((s+1)·U/K) − 1; too many
// shards, and kinds not available, are refused.
func TestPlanUnits(t *testing.T) {
	p, err := ToyPlan(Input{}, "", ToySettings{Toys: 520, Seed: 3}, 4, "")
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Units) != 11 || p.Units[10].Toys != 20 || p.Units[3].FirstToy != 150 || p.Units[3].StreamBase+150 != validate.ToyStream(150) {
		t.Errorf("units: %+v", p.Units)
	}
	var n []int
	for s := range p.Shards {
		_, c := p.MemberRange(s)
		n = append(n, c)
	}
	if !reflect.DeepEqual(n, []int{100, 150, 150, 120}) {
		t.Errorf("toys per shard %v", n)
	}
	if _, err := ToyPlan(Input{}, "", ToySettings{Toys: 520}, 12, ""); err == nil {
		t.Error("12 shards of 11 units accepted")
	}
	for _, k := range Kinds() {
		if err := k.Check(); err != nil {
			t.Errorf("%s: %v", k, err)
		}
	}
}

// TestVariationPlan: the systematic variations split into shards of as
// equal a number as can be, contiguous and in order; a plan of more
// shards than variations, or of none, is refused; the plan reads back.
func TestVariationPlan(t *testing.T) {
	names := []string{"a", "b", "c", "d", "e"}
	p, err := VariationPlan(Input{Path: "x.yaml", SHA256: "00"}, "11", []Input{{Path: "d.csv", SHA256: "22"}}, names, 3, "out")
	if err != nil {
		t.Fatal(err)
	}
	var got [][2]int
	for s := range p.Shards {
		first, count := p.MemberRange(s)
		got = append(got, [2]int{first, count})
	}
	// 5 units in 3 shards: ⌊s·5/3⌋ boundaries 0, 1, 3, 5 (common practice:
	// the balanced block split)
	if !reflect.DeepEqual(got, [][2]int{{0, 1}, {1, 2}, {3, 2}}) {
		t.Errorf("shards %v", got)
	}
	dir := t.TempDir()
	if err := p.Write(dir); err != nil {
		t.Fatal(err)
	}
	q, err := Read(dir)
	if err != nil {
		t.Fatal(err)
	}
	if q.Kind != Variations || len(q.Variations) != 5 || q.Variations[4].Name != "e" || q.CheckFiles([]Input{{Path: "d.csv", SHA256: "22"}}) != nil {
		t.Errorf("plan read back %+v", q)
	}
	if err := q.CheckFiles([]Input{{Path: "d.csv", SHA256: "23"}}); err == nil || !strings.Contains(err.Error(), "has changed") {
		t.Errorf("a changed input: %v", err)
	}
	if _, err := VariationPlan(Input{}, "", nil, names, 6, ""); err == nil {
		t.Error("6 shards of 5 variations accepted")
	}
	if _, err := VariationPlan(Input{}, "", nil, nil, 1, ""); err == nil {
		t.Error("a plan without variations accepted")
	}
}

// TestReplicaPlan: 120 bootstrap replicas are the units of 50, 50 and 20
// replicas (analysis.ReplicaUnit), split into shards of whole units;
// more shards than units, or fewer than 2 replicas, are refused; the plan
// reads back.
func TestReplicaPlan(t *testing.T) {
	p, err := ReplicaPlan(Input{Path: "x.yaml", SHA256: "00"}, "11", nil, 120, 2, "out")
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(p.Replicas, []ReplicaUnit{{0, 0, 50}, {1, 50, 50}, {2, 100, 20}}) || p.Members() != 120 {
		t.Errorf("units %+v", p.Replicas)
	}
	// 3 units in 2 shards: ⌊s·3/2⌋ boundaries 0, 1, 3 (common practice: the
	// balanced block split)
	if !reflect.DeepEqual(p.Shards, []Shard{{0, 0, 1}, {1, 1, 2}}) {
		t.Errorf("shards %+v", p.Shards)
	}
	dir := t.TempDir()
	if err := p.Write(dir); err != nil {
		t.Fatal(err)
	}
	if q, err := Read(dir); err != nil || q.Kind != Replicas || q.Members() != 120 {
		t.Errorf("plan read back %+v, %v", q, err)
	}
	if _, err := ReplicaPlan(Input{}, "", nil, 120, 4, ""); err == nil {
		t.Error("4 shards of 3 units accepted")
	}
	if _, err := ReplicaPlan(Input{}, "", nil, 1, 1, ""); err == nil {
		t.Error("1 replica accepted")
	}
}

// TestExactVector: the estimates of a shard file read back with the same
// IEEE 754 bits (compared with math.Float64bits: common practice), NaN,
// infinities, −0 and subnormal numbers included.
func TestExactVector(t *testing.T) {
	v := exact{0, math.Copysign(0, -1), 1, 0.1, 1.0 / 3, math.MaxFloat64, math.SmallestNonzeroFloat64, -2.5e-310, math.NaN(), math.Inf(1), math.Inf(-1)}
	rng := rand.New(rand.NewPCG(3, 4))
	for range 1000 {
		v = append(v, math.Float64frombits(rng.Uint64()))
	}
	b, err := json.Marshal(v)
	if err != nil {
		t.Fatal(err)
	}
	var w exact
	if err := json.Unmarshal(b, &w); err != nil {
		t.Fatal(err)
	}
	if len(w) != len(v) {
		t.Fatalf("%d numbers read back of %d", len(w), len(v))
	}
	for i := range v {
		if math.Float64bits(v[i]) != math.Float64bits(w[i]) && !(math.IsNaN(v[i]) && math.IsNaN(w[i])) {
			t.Errorf("number %d: %v read back as %v", i, v[i], w[i])
		}
	}
	if err := json.Unmarshal([]byte(`[1,"one"]`), &w); err == nil {
		t.Error(`"one" read as a number`)
	}
}

// TestArrays: job arrays split at MaxArraySize with offsets, their index
// lists in Slurm's syntax (common practice: "--array=0-9%4", index lists
// with ranges).
func TestArrays(t *testing.T) {
	var all []int
	for s := range 10 {
		all = append(all, s)
	}
	a := Arrays(all, 4)
	if len(a) != 3 || a[1].Offset != 4 || a[2].Spec(2) != "0-1%2" || a[0].Spec(0) != "0-3" {
		t.Errorf("arrays %+v", a)
	}
	a = Arrays([]int{1, 2, 3, 5, 9}, 4)
	if len(a) != 3 || a[0].Spec(0) != "1-3" || a[1].Spec(0) != "1" || a[2].Spec(0) != "1" || !reflect.DeepEqual(a[2].Shards(), []int{9}) {
		t.Errorf("arrays %+v", a)
	}
	n, err := MaxArraySize([]byte("Configuration data as of now\nMaxArraySize            = 5000\nMaxJobCount = 10000\n"))
	if err != nil || n != 5000 {
		t.Errorf("MaxArraySize %d, %v", n, err)
	}
	if n, _ := MaxArraySize([]byte("nothing\n")); n != DefaultMaxArraySize {
		t.Errorf("default MaxArraySize %d", n)
	}
}
