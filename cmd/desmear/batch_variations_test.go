package main

import (
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// demoVariations are systematic variations of the demo: two reweightings
// of the simulation and a pair of reco pt scales (one unit each).
const demoVariations = `
variations:
  - name: pt-tilt
    weight: "where(pt_true > 0, 1 + 0.004*pt_true, 1)"
  - name: pt-scale
    up: {reco_observables: {pt: "1.01*pt_reco"}}
    down: {reco_observables: {pt: "0.99*pt_reco"}}
  - name: y-tilt
    weight: "where(pt_true > 0, 1 + 0.05*abs(y_true), 1)"
`

// withVariations adds demoVariations to the demo's analysis file.
func withVariations(t *testing.T, b []byte) []byte { return append(b, demoVariations...) }

// TestBatchVariationsRefused: a shard file of another plan is not
// taken, and a shard whose analysis file changed after the plan is
// refused.
func TestBatchVariationsRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := batchDemo(t)
	b, _ := os.ReadFile(an)
	if err := os.WriteFile(an, append(b, demoVariations...), 0o644); err != nil {
		t.Fatal(err)
	}
	w := filepath.Join(t.TempDir(), "work")
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "3", "--workdir", w); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	// A shard file of another plan (of the same variations) is not taken.
	w2 := filepath.Join(t.TempDir(), "other")
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "3", "--workdir", w2, "--out", filepath.Join(w2, "result")); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "run", w2, "--shard", "2", "-q"); code != 0 {
		t.Fatalf("run: exit %d\n%s\n%s", code, out, errs)
	}
	if err := os.MkdirAll(filepath.Join(w, "shards"), 0o755); err != nil {
		t.Fatal(err)
	}
	foreign, _ := os.ReadFile(filepath.Join(w2, "shards", "shard-00002.json"))
	if err := os.WriteFile(filepath.Join(w, "shards", "shard-00002.json"), foreign, 0o644); err != nil {
		t.Fatal(err)
	}
	code, out, _ := runCLI(t, ctx, "batch", "status", w)
	if code != 0 || !strings.Contains(out, "not usable: shard 2:") || !strings.Contains(out, "belongs to another plan") {
		t.Errorf("status with a foreign shard: exit %d\n%s", code, out)
	}
	if err := os.WriteFile(an, append(b, strings.Replace(demoVariations, "0.004", "0.005", 1)...), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errs := runCLI(t, ctx, "batch", "run", w, "--shard", "0")
	if code != exitInput || !strings.Contains(errs, "has changed since the plan was made") {
		t.Errorf("changed analysis: exit %d\n%s", code, errs)
	}
}
