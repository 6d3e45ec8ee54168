package analysis

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/response"
)

// An analysis with uncertainty.replicas adds the simulation source of
// the bootstrap (method.md §25 Bootstrap replicas of the simulated
// events) and records it; Analysis.Replicas gives the same bits for any
// core count and block size, and ranges computed alone merge into the
// ensemble of the whole range to rounding (T. F. Chan, G. H. Golub and
// R. J. LeVeque, STAN-CS-79-773, 1979; method.md §17).
func TestReplicasRun(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(20000, 5))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(4000, 6)[1]})
	path := writeAnalysis(t, dir, "sim.csv", "data.csv")
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	const n = 40
	text := strings.Replace(string(src), "  covariance: full\n", "  covariance: full\n  replicas: 40\n  seed: 3\n", 1) +
		"variations:\n  - {name: one, weight: \"1\"}\n"
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	out, err := a.Run(ctx, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	sim := out.Result.Source(unfold.SourceSimulation)
	if sim == nil || sim.Method != unfold.MethodReplicas || sim.Samples != n || sim.Covariance == nil {
		t.Fatalf("simulation source %+v", sim)
	}
	// A weight of 1 shifts nothing (method.md §21 Systematic variations:
	// δ = μ' − μ), with the bootstrap asked for too.
	if v := out.Result.Source("one"); v == nil || slices.ContainsFunc(v.Shift, func(x float64) bool { return x != 0 }) {
		t.Errorf("variation source %+v", v)
	}
	if want := math.Sqrt(2.0 / (n - 1)); sim.Precision != want { // method.md §25
		t.Errorf("precision %v, want %v", sim.Precision, want)
	}
	if !slices.ContainsFunc(out.Notes, func(w string) bool { return strings.Contains(w, "40 replicas per pass") }) {
		t.Errorf("no note on the replica blocks in %q", out.Notes)
	}
	var doc struct {
		Settings struct {
			Replicas int `json:"replicas"`
		} `json:"settings"`
		RandomStreams struct {
			Streams []struct{ Unit, Derivation string } `json:"streams"`
		} `json:"random_streams"`
	}
	b, err := os.ReadFile(filepath.Join(out.Folder, "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	if doc.Settings.Replicas != n || !slices.ContainsFunc(doc.RandomStreams.Streams, func(s struct{ Unit, Derivation string }) bool {
		return s.Unit == "replica" && s.Derivation == response.ReplicaDerivation
	}) {
		t.Errorf("result.json settings.replicas %d, streams %+v", doc.Settings.Replicas, doc.RandomStreams.Streams)
	}

	s, m, err := a.Settings()
	if err != nil {
		t.Fatal(err)
	}
	p := out.Problem
	nr, nt := p.Migrations.Dims()
	prev := runtime.GOMAXPROCS(1)
	small := *s
	small.MemoryLimit = 2 * response.ReplicaBytes(p.Migrations.NNZ(), nt, nr) // one replica per pass
	if ReplicaBlock(p, small.MemoryLimit) != 1 {
		t.Fatalf("block %d, want 1", ReplicaBlock(p, small.MemoryLimit))
	}
	one, _, err := a.Replicas(ctx, out.Response, p, &small, m, 0, n, nil, nil)
	runtime.GOMAXPROCS(prev)
	if err != nil {
		t.Fatal(err)
	}
	runtime.GOMAXPROCS(2)
	whole, _, err := a.Replicas(ctx, out.Response, p, s, m, 0, n, nil, nil)
	runtime.GOMAXPROCS(prev)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(one.M2, whole.M2) || !slices.Equal(one.Mean, whole.Mean) {
		t.Error("the replicas have other bits one per pass on 1 core than all in one pass on 2")
	}
	cov := whole.Covariance(nil)
	for j := range nt {
		for k := range nt {
			if out.Result.Determined[j] && out.Result.Determined[k] && cov.At(j, k) != sim.Covariance.At(j, k) {
				t.Fatalf("covariance (%d,%d) of the run %v, of Replicas %v", j, k, sim.Covariance.At(j, k), cov.At(j, k))
			}
		}
	}
	lo, _, err := a.Replicas(ctx, out.Response, p, s, m, 0, 15, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	hi, _, err := a.Replicas(ctx, out.Response, p, s, m, 15, n, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	lo.Merge(hi)
	for i, v := range whole.M2 {
		if math.Abs(lo.M2[i]-v) > 1e-9*math.Abs(v)+1e-12 {
			t.Errorf("co-moment %d: %v merged from two ranges, %v in one", i, lo.M2[i], v)
		}
	}
}

// With negative event weights and negative cells clipped in the nominal
// response, the replicas' cells are clipped too (method.md §25: the
// replica is classified and treated exactly as the nominal response).
func TestReplicasClipNegativeCells(t *testing.T) {
	dir := t.TempDir()
	writeSample(t, filepath.Join(dir, "sim.csv"), simColumns, simEvents(4000, 8))
	writeSample(t, filepath.Join(dir, "data.csv"), []string{"x"}, [][]float64{simEvents(2000, 9)[1]})
	path := writeAnalysis(t, dir, "sim.csv", "data.csv")
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.NewReplacer("  covariance: full\n", "  covariance: full\n  replicas: 30\n",
		"    weight: w\n", "    weight: w - 0.62\n", "  iterations: 4\n", "  iterations: 4\n  negative_cells: clip\n").Replace(string(src))
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	a, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	out, err := a.Run(context.Background(), nil, false)
	if err != nil {
		t.Fatal(err)
	}
	if out.Remedies == nil || out.Result.Source(unfold.SourceSimulation) == nil {
		t.Errorf("remedies %+v, sources %d", out.Remedies, len(out.Result.Sources))
	}
}
