package main

import (
	"bytes"
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

// variationsDemo writes the demo with demoVariations added to its
// analysis file, and returns the analysis file.
func variationsDemo(t *testing.T) string {
	t.Helper()
	an := batchDemo(t)
	b, err := os.ReadFile(an)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(an, append(b, demoVariations...), 0o644); err != nil {
		t.Fatal(err)
	}
	return an
}

// sameResults fails unless the result folders hold the same files, byte
// for byte, result.root aside (ROOT files record their write time).
func sameResults(t *testing.T, want, got string) {
	t.Helper()
	ents, err := os.ReadDir(want)
	if err != nil {
		t.Fatal(err)
	}
	gents, _ := os.ReadDir(got)
	if len(gents) != len(ents) {
		t.Errorf("%s has %d files, %s %d", got, len(gents), want, len(ents))
	}
	for _, e := range ents {
		if e.IsDir() {
			sameResults(t, filepath.Join(want, e.Name()), filepath.Join(got, e.Name()))
			continue
		}
		b, err := os.ReadFile(filepath.Join(got, e.Name()))
		if strings.HasSuffix(e.Name(), ".root") {
			if err != nil {
				t.Error(err)
			}
			continue
		}
		a, _ := os.ReadFile(filepath.Join(want, e.Name()))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("%s differs from %s (%v)", filepath.Join(got, e.Name()), filepath.Join(want, e.Name()), err)
		}
	}
}

// TestBatchVariations: the systematic variations of an analysis file
// planned in 1 shard, in as many shards as variations and in an uneven
// split (1 and 2), run here and merged, write the result folder of
// "desmear unfold ANALYSIS.yaml" in one run byte for byte (sources.csv,
// shifts.csv, result.json and every other file; the determinism rule of
// DEVELOPERS.md: the same bits for any split of the work); a finished
// shard is not run again, status counts the variations, and a merge with
// a shard missing is refused naming it.
func TestBatchVariations(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := variationsDemo(t)
	if code, out, errs := runCLI(t, ctx, "unfold", an, "--force", "-q"); code != 0 {
		t.Fatalf("unfold: exit %d\n%s\n%s", code, out, errs)
	}
	single := filepath.Join(filepath.Dir(an), "result")
	for _, f := range []string{"sources.csv", "shifts.csv"} {
		if _, err := os.Stat(filepath.Join(single, f)); err != nil {
			t.Fatalf("the single run wrote no %s: %v", f, err)
		}
	}
	if b, _ := os.ReadFile(filepath.Join(single, "result.json")); !bytes.Contains(b, []byte(`"pt-scale"`)) {
		t.Fatalf("result.json of the single run has no source pt-scale")
	}
	tmp := t.TempDir()
	for _, k := range []string{"1", "3", "2"} {
		w, out := filepath.Join(tmp, "work"+k), filepath.Join(tmp, "result"+k)
		if code, so, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", k, "--workdir", w, "--out", out); code != 0 || !strings.Contains(so, "(3 systematic variations in "+k+" shards)") {
			t.Fatalf("plan %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		last := map[string]string{"1": "0", "3": "2", "2": "1"}[k]
		if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", last); code != 0 || !strings.Contains(errs, "shard "+last+" (variations") {
			t.Fatalf("run %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", last); code != 0 || !strings.Contains(errs, "shard "+last+" was done already") {
			t.Errorf("run %s again: exit %d\n%s\n%s", k, code, so, errs)
		}
		if k == "2" {
			// shard 0 holds pt-tilt, shard 1 pt-scale and y-tilt
			code, so, errs := runCLI(t, ctx, "batch", "status", w)
			if code != 0 || !strings.Contains(so, "done: 1 of 2 shards (2 of 3 variations)") || !strings.Contains(so, "missing: 0\n") {
				t.Errorf("status: exit %d\n%s\n%s", code, so, errs)
			}
			code, so, errs = runCLI(t, ctx, "batch", "merge", w)
			if code != exitInput || !strings.Contains(errs, "missing: 0") {
				t.Errorf("merge with a shard missing: exit %d\n%s\n%s", code, so, errs)
			}
		}
		if code, so, errs := runCLI(t, ctx, "batch", "run-local", w, "--jobs", "2", "-q"); code != 0 {
			t.Fatalf("run-local %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		code, so, errs := runCLI(t, ctx, "batch", "status", w)
		if code != 0 || !strings.Contains(so, "done: "+k+" of "+k+" shards (3 of 3 variations)") {
			t.Errorf("status %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		if code, so, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 || !strings.Contains(so, "result: "+out) {
			t.Fatalf("merge %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		sameResults(t, single, out)
	}
}

// TestBatchVariationsRefused: a plan of more shards than variations, or
// of an analysis file without variations, is refused with the reason;
// a shard whose analysis file changed after the plan is refused.
func TestBatchVariationsRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := batchDemo(t)
	w := filepath.Join(t.TempDir(), "work")
	code, _, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "1", "--workdir", w)
	if code != exitUsage || !strings.Contains(errs, "has no systematic variations") {
		t.Errorf("no variations: exit %d\n%s", code, errs)
	}
	b, _ := os.ReadFile(an)
	if err := os.WriteFile(an, append(b, demoVariations...), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, errs = runCLI(t, ctx, "batch", "plan", an, "--variations", "--seed", "3", "--shards", "1", "--workdir", w)
	if code != exitUsage || !strings.Contains(errs, "--seed is an option of a toy ensemble") {
		t.Errorf("--seed with --variations: exit %d\n%s", code, errs)
	}
	code, _, errs = runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "4", "--workdir", w)
	if code != exitUsage || !strings.Contains(errs, "3 systematic variations") || !strings.Contains(errs, "give at most 3") {
		t.Errorf("4 shards of 3: exit %d\n%s", code, errs)
	}
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
	code, _, errs = runCLI(t, ctx, "batch", "run", w, "--shard", "0")
	if code != exitInput || !strings.Contains(errs, "has changed since the plan was made") {
		t.Errorf("changed analysis: exit %d\n%s", code, errs)
	}
}
