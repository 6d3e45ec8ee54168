package main

import (
	"bytes"
	"context"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

// slurmCluster skips the test unless sbatch is installed and a cluster
// answers.
func slurmCluster(t *testing.T) {
	t.Helper()
	if _, err := exec.LookPath("sbatch"); err != nil {
		t.Skip("sbatch is not installed: skipping the test on a Slurm cluster (.ci/run installs Slurm and starts a one-node cluster)")
	}
	ctx, cancel := context.WithTimeout(context.Background(), 10*time.Second)
	defer cancel()
	out, err := exec.CommandContext(ctx, "scontrol", "ping").CombinedOutput()
	if err != nil || !strings.Contains(string(out), "UP") {
		t.Skipf("no Slurm cluster answers (scontrol ping: %v, %s): skipping the test on a Slurm cluster (.ci/slurm-start starts one)", err, strings.TrimSpace(string(out)))
	}
}

// finalStates are the states a Slurm job ends in (common practice: the
// job state codes of Slurm's squeue documentation).
var finalStates = map[string]bool{"COMPLETED": true, "FAILED": true, "CANCELLED": true, "TIMEOUT": true, "NODE_FAIL": true,
	"OUT_OF_MEMORY": true, "BOOT_FAIL": true, "DEADLINE": true, "PREEMPTED": true}

// waitJob polls the job's state every 0.25 s (sbatch --wait backs off to
// 32-second polls) until it ends, and fails the test unless it completed.
func waitJob(t *testing.T, id, logs string) {
	t.Helper()
	re := regexp.MustCompile(`JobState=(\S+)`)
	state := ""
	for range 2400 { // 10 minutes at most
		out, err := exec.Command("scontrol", "show", "job", "-o", id).Output()
		if err == nil {
			if m := re.FindSubmatch(out); m != nil {
				state = string(m[1])
			}
		}
		if finalStates[state] {
			break
		}
		time.Sleep(250 * time.Millisecond)
	}
	if state != "COMPLETED" {
		q, _ := exec.Command("squeue", "-t", "all").CombinedOutput()
		var ls strings.Builder
		files, _ := filepath.Glob(filepath.Join(logs, "*.log"))
		for _, f := range files {
			b, _ := os.ReadFile(f)
			ls.WriteString(f + ":\n" + string(b))
		}
		t.Fatalf("job %s ended %q\n%s\n%s", id, state, q, ls.String())
	}
}

// TestBatchSlurm submits a plan's shards as a job array with its merge as
// a dependent job on a real cluster, waits, and compares the merged
// validation folder with "desmear validate" and with run-local byte for
// byte (the determinism rule of DEVELOPERS.md); then it removes a shard
// and the merged folder and resubmits the missing shard. Then a response
// built in parts by a job array and merged by the dependent job is the
// bundle of "desmear response" in one run; last, the systematic
// variations, and then the bootstrap replicas, computed by a job array and
// merged by the dependent job are the result folder of "desmear unfold"
// in one run.
func TestBatchSlurm(t *testing.T) {
	slurmCluster(t)
	ctx := context.Background()
	an := batchDemo(t)
	tmp := t.TempDir()
	single := filepath.Join(tmp, "single")
	if code, out, errs := runCLI(t, ctx, append([]string{"validate", an, "--out", single, "-q"}, batchToyArgs...)...); code != 0 {
		t.Fatalf("validate: exit %d\n%s\n%s", code, out, errs)
	}
	local, w := filepath.Join(tmp, "local"), filepath.Join(tmp, "slurm")
	for _, d := range []string{local, w} {
		if code, out, errs := runCLI(t, ctx, append([]string{"batch", "plan", an, "--shards", "3", "--workdir", d}, batchToyArgs...)...); code != 0 {
			t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
		}
	}
	if code, out, errs := runCLI(t, ctx, "batch", "run-local", local, "--jobs", "2", "-q"); code != 0 {
		t.Fatalf("run-local: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "merge", local, "-q"); code != 0 {
		t.Fatalf("merge: exit %d\n%s\n%s", code, out, errs)
	}
	// The jobs run this test binary as the program.
	t.Setenv("DESMEAR_TEST_AS_PROGRAM", "1")
	mergeJob := regexp.MustCompile(`(?m)^merge: job (\d+)$`)
	submit := func(args ...string) {
		t.Helper()
		code, out, errs := runCLI(t, ctx, append([]string{"batch", "submit", w, "--slurm", "--max-parallel", "3"}, args...)...)
		m := mergeJob.FindStringSubmatch(out)
		if code != 0 || m == nil {
			t.Fatalf("submit: exit %d\n%s\n%s", code, out, errs)
		}
		waitJob(t, m[1], filepath.Join(w, "slurm"))
	}
	submit()
	sameFolders(t, single, filepath.Join(w, "validation"))
	sameFolders(t, filepath.Join(local, "validation"), filepath.Join(w, "validation"))

	if err := os.RemoveAll(filepath.Join(w, "validation")); err != nil {
		t.Fatal(err)
	}
	if err := os.Remove(filepath.Join(w, "shards", "shard-00001.json")); err != nil {
		t.Fatal(err)
	}
	submit("--missing")
	sameFolders(t, single, filepath.Join(w, "validation"))

	// The response in parts, as an array with the bundle merged by the
	// dependent job, against the bundle of one run.
	bundle, rw := filepath.Join(tmp, "bundle"), filepath.Join(tmp, "response")
	if code, out, errs := runCLI(t, ctx, "response", an, "--out", bundle, "-q"); code != 0 {
		t.Fatalf("response: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--response", "--shards", "3", "--workdir", rw); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	w = rw
	submit()
	sameFolders(t, bundle, filepath.Join(rw, "response"))

	// The systematic variations, one array task each, merged by the
	// dependent job into the result folder of "desmear unfold" in one run.
	b, err := os.ReadFile(an)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(an, append(b, demoVariations...), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, out, errs := runCLI(t, ctx, "unfold", an, "--force", "-q"); code != 0 {
		t.Fatalf("unfold: exit %d\n%s\n%s", code, out, errs)
	}
	vw, merged := filepath.Join(tmp, "variations"), filepath.Join(tmp, "variations-result")
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--variations", "--shards", "3", "--workdir", vw, "--out", merged); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	w = vw
	submit()
	sameFolders(t, filepath.Join(filepath.Dir(an), "result"), merged)

	// The bootstrap replicas, one array task per unit of 50, the same.
	b, _ = os.ReadFile(an)
	if err := os.WriteFile(an, bytes.Replace(b, []byte("response_samples: 200"), []byte("replicas: 120"), 1), 0o644); err != nil {
		t.Fatal(err)
	}
	if code, out, errs := runCLI(t, ctx, "unfold", an, "--force", "-q"); code != 0 {
		t.Fatalf("unfold: exit %d\n%s\n%s", code, out, errs)
	}
	pw := filepath.Join(tmp, "replicas")
	merged = filepath.Join(tmp, "replicas-result")
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--replicas", "120", "--shards", "3", "--workdir", pw, "--out", merged); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	w = pw
	submit()
	sameFolders(t, filepath.Join(filepath.Dir(an), "result"), merged)
}
