package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// replicasDemo writes the demo with its simulation uncertainty from 120
// bootstrap replicas (three units: 50, 50 and 20) in place of the
// sampled responses, and the variations of demoVariations when
// variations is set; it returns the analysis file.
func replicasDemo(t *testing.T, variations bool) string {
	t.Helper()
	an := batchDemo(t)
	b, err := os.ReadFile(an)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Contains(b, []byte("response_samples: 200")) {
		t.Fatalf("the demo's analysis file has no response_samples: 200:\n%s", b)
	}
	b = bytes.Replace(b, []byte("response_samples: 200"), []byte("replicas: 120"), 1)
	if variations {
		b = append(b, demoVariations...)
	}
	if err := os.WriteFile(an, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return an
}

// TestBatchReplicas: the bootstrap replicas of an analysis file planned
// in 1 shard, in as many shards as units (50, 50, 20 replicas) and in an
// uneven split (1 and 2 units), run here and merged, write the result
// folder of "desmear unfold ANALYSIS.yaml" in one run byte for byte (the
// determinism rule of DEVELOPERS.md: the units' ensembles merged in the
// same order as one run merges them, Chan, Golub and LeVeque, STAN-CS-79-773,
// 1979); a finished shard is not run again and status counts the
// replicas. The analysis has systematic variations too, which the merge
// unfolds.
func TestBatchReplicas(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := replicasDemo(t, true)
	if code, out, errs := runCLI(t, ctx, "unfold", an, "--force", "-q"); code != 0 {
		t.Fatalf("unfold: exit %d\n%s\n%s", code, out, errs)
	}
	single := filepath.Join(filepath.Dir(an), "result")
	if b, _ := os.ReadFile(filepath.Join(single, "result.json")); !bytes.Contains(b, []byte(`"bootstrap-replicas"`)) || !bytes.Contains(b, []byte(`"pt-scale"`)) {
		t.Fatalf("result.json of the single run has no bootstrap-replicas source or no pt-scale")
	}
	tmp := t.TempDir()
	for _, k := range []string{"1", "3", "2"} {
		w, out := filepath.Join(tmp, "work"+k), filepath.Join(tmp, "result"+k)
		if code, so, errs := runCLI(t, ctx, "batch", "plan", an, "--replicas", "120", "--shards", k, "--workdir", w, "--out", out); code != 0 || !strings.Contains(so, "(120 bootstrap replicas in 3 units of up to 50, "+k+" shards)") {
			t.Fatalf("plan %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		last := map[string]string{"1": "0", "3": "2", "2": "1"}[k]
		if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", last); code != 0 || !strings.Contains(errs, "shard "+last+" (replicas") {
			t.Fatalf("run %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", last); code != 0 || !strings.Contains(errs, "shard "+last+" was done already") {
			t.Errorf("run %s again: exit %d\n%s\n%s", k, code, so, errs)
		}
		if k == "2" {
			// shard 0 holds replicas 0..49, shard 1 replicas 50..119
			code, so, errs := runCLI(t, ctx, "batch", "status", w)
			if code != 0 || !strings.Contains(so, "done: 1 of 2 shards (70 of 120 replicas)") || !strings.Contains(so, "missing: 0\n") {
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
		if code != 0 || !strings.Contains(so, "done: "+k+" of "+k+" shards (120 of 120 replicas)") {
			t.Errorf("status %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		if code, so, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 || !strings.Contains(so, "result: "+out) {
			t.Fatalf("merge %s: exit %d\n%s\n%s", k, code, so, errs)
		}
		sameResults(t, single, out)
	}
	// With the per-bin variances only, a derived quantity's covariance
	// comes from the replicas' ensembles of D μ_r (method.md §22), which
	// the shard files carry: the merge writes the single run's folder.
	b, err := os.ReadFile(an)
	if err != nil {
		t.Fatal(err)
	}
	diag := filepath.Join(filepath.Dir(an), "diag.yaml")
	b = bytes.Replace(b, []byte("covariance: full"), []byte("covariance: diag"), 1)
	b = bytes.Replace(b, []byte("\noutput:\n"), []byte("\noutput:\n  derived:\n    - {name: y-proj, region: central, kind: projection, axes: [y]}\n"), 1)
	b = bytes.Replace(b, []byte("folder: result"), []byte("folder: result-diag"), 1)
	if err := os.WriteFile(diag, b, 0o644); err != nil {
		t.Fatal(err)
	}
	if code, so, errs := runCLI(t, ctx, "unfold", diag, "--force", "-q"); code != 0 {
		t.Fatalf("unfold diag: exit %d\n%s\n%s\n%s", code, so, errs, b)
	}
	singleDiag := filepath.Join(filepath.Dir(an), "result-diag")
	if d, _ := os.ReadFile(filepath.Join(singleDiag, "derived-y-proj.csv")); !bytes.Contains(d, []byte("uncertainty")) {
		t.Fatalf("the diag run's derived-y-proj.csv has no uncertainty:\n%s", d)
	}
	{
		w, out := filepath.Join(tmp, "work-diag"), filepath.Join(tmp, "result-diag")
		for _, args := range [][]string{{"batch", "plan", diag, "--replicas", "120", "--shards", "2", "--workdir", w, "--out", out}, {"batch", "run-local", w, "-q"}, {"batch", "merge", w, "-q"}} {
			if code, so, errs := runCLI(t, ctx, args...); code != 0 {
				t.Fatalf("%v: exit %d\n%s\n%s", args, code, so, errs)
			}
		}
		sameResults(t, singleDiag, out)
	}
	// A variations plan of the same file computes the replicas in its merge.
	w, out := filepath.Join(tmp, "variations"), filepath.Join(tmp, "result-variations")
	if code, so, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "2", "--workdir", w, "--out", out); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, so, errs)
	}
	if code, so, errs := runCLI(t, ctx, "batch", "run-local", w, "-q"); code != 0 {
		t.Fatalf("run-local: exit %d\n%s\n%s", code, so, errs)
	}
	if code, so, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 {
		t.Fatalf("merge: exit %d\n%s\n%s", code, so, errs)
	}
	sameResults(t, single, out)
}

// TestBatchReplicasRefused: --replicas N other than the file's
// uncertainty.replicas, and more shards than units, are refused with the
// reason.
func TestBatchReplicasRefused(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := replicasDemo(t, false)
	w := filepath.Join(t.TempDir(), "work")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--replicas", "100", "--shards", "1"}, "asks for 120 bootstrap replicas (uncertainty.replicas): plan with --replicas 120"},
		{[]string{"--replicas", "120", "--shards", "4"}, "are 3 units of up to 50"},
		{[]string{"--replicas", "1", "--shards", "1"}, "--replicas 1: give at least 2"},
		{[]string{"--replicas", "120", "--shards", "1", "--seed", "2"}, "--seed is an option of a toy ensemble"},
	} {
		code, _, errs := runCLI(t, ctx, append([]string{"batch", "plan", an, "--workdir", w}, c.args...)...)
		if code != exitUsage || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, %s", c.args, code, errs)
		}
	}
}
