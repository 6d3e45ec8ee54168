package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
)

// withReplicas sets the demo's simulation uncertainty to 120 bootstrap
// replicas (three units: 50, 50 and 20) in place of the sampled
// responses.
func withReplicas(t *testing.T, b []byte) []byte {
	if !bytes.Contains(b, []byte("response_samples: 200")) {
		t.Fatalf("the demo's analysis file has no response_samples: 200:\n%s", b)
	}
	return bytes.Replace(b, []byte("response_samples: 200"), []byte("replicas: 120"), 1)
}

// replicasThen checks more of the replicas of TestBatchKinds: the
// covariance of a derived quantity from the replicas, and a variations
// plan of the same analysis file an, unfolded in one run into single.
func replicasThen(t *testing.T, an, single, tmp string) {
	ctx := context.Background()
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
		sameFolders(t, singleDiag, out)
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
	sameFolders(t, single, out)
}

// TestBatchMergePrintsUnfold: the merge of a plan whose shards unfold
// the analysis again prints what "desmear unfold ANALYSIS.yaml" prints
// (as "desmear help cluster" states): the same standard output byte for
// byte, written into the same result folder, and the same notes on
// standard error, bar the line timing the single run.
func TestBatchMergePrintsUnfold(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	ctx := context.Background()
	an := batchDemo(t, withReplicas)
	code, want, wantErr := runCLI(t, ctx, "unfold", an, "--force")
	if code != 0 {
		t.Fatalf("unfold: exit %d\n%s\n%s", code, want, wantErr)
	}
	timing := regexp.MustCompile(`(?m)^desmear: analysis .* done in [0-9.]+ s\n`)
	if !timing.MatchString(wantErr) {
		t.Fatalf("unfold: no line timing the run in\n%s", wantErr)
	}
	wantErr = timing.ReplaceAllString(wantErr, "")
	// The replicas' note is on standard error, so the notes are compared.
	if !strings.Contains(wantErr, "note: the bootstrap filled its 120 replicas") {
		t.Fatalf("unfold: no note of the bootstrap in\n%s", wantErr)
	}
	w := filepath.Join(t.TempDir(), "work")
	for _, args := range [][]string{{"batch", "plan", an, "--replicas", "120", "--shards", "1", "--workdir", w}, {"batch", "run-local", w, "-q"}} {
		if code, so, errs := runCLI(t, ctx, args...); code != 0 {
			t.Fatalf("%v: exit %d\n%s\n%s", args, code, so, errs)
		}
	}
	code, got, gotErr := runCLI(t, ctx, "batch", "merge", w, "--force")
	if code != 0 {
		t.Fatalf("merge: exit %d\n%s\n%s", code, got, gotErr)
	}
	if got != want {
		t.Errorf("merge prints\n%s\nunfold prints\n%s", got, want)
	}
	if gotErr != wantErr {
		t.Errorf("merge says on standard error\n%s\nunfold says\n%s", gotErr, wantErr)
	}
}
