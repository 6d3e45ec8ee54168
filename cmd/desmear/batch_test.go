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

// TestMain lets the test binary stand in for the program (the Slurm jobs
// of TestBatchSlurm run it): with DESMEAR_TEST_AS_PROGRAM=1 it runs the
// command line it was given instead of the tests.
func TestMain(m *testing.M) {
	if os.Getenv("DESMEAR_TEST_AS_PROGRAM") == "1" {
		os.Exit(run(context.Background(), os.Args[1:], os.Stdin, os.Stdout, os.Stderr))
	}
	os.Exit(m.Run())
}

// batchDemo writes a small demo and returns its analysis file.
func batchDemo(t *testing.T) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "demo")
	if code, stdout, stderr := runCLI(t, context.Background(), "demo", "--out", dir, "--events", "20000", "--no-report", "-q"); code != 0 {
		t.Fatalf("demo: exit %d\n%s\n%s", code, stdout, stderr)
	}
	return filepath.Join(dir, "analysis.yaml")
}

// sameFolders fails unless the folders hold the same files, byte for byte.
func sameFolders(t *testing.T, want, got string) {
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
		a, _ := os.ReadFile(filepath.Join(want, e.Name()))
		b, err := os.ReadFile(filepath.Join(got, e.Name()))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("%s differs from %s (%v)", filepath.Join(got, e.Name()), filepath.Join(want, e.Name()), err)
		}
	}
}

// batchToyArgs are the toy settings shared by the single run and the plans.
var batchToyArgs = []string{"--toys", "160", "--max-iterations", "3", "--seed", "5"}

// TestBatchLocal: a plan's shards run here and merged write the same
// validation folder as "desmear validate", bit for bit (the determinism
// rule of DEVELOPERS.md: the same bits for any split of the work); a
// finished shard is not run again, status reads the shard files, and a
// merge with a shard missing is refused naming it.
func TestBatchLocal(t *testing.T) {
	ctx := context.Background()
	an := batchDemo(t)
	tmp := t.TempDir()
	single := filepath.Join(tmp, "single")
	if code, out, errs := runCLI(t, ctx, append([]string{"validate", an, "--out", single, "-q"}, batchToyArgs...)...); code != 0 {
		t.Fatalf("validate: exit %d\n%s\n%s", code, out, errs)
	}
	w := filepath.Join(tmp, "work")
	if code, out, errs := runCLI(t, ctx, append([]string{"batch", "plan", an, "--shards", "3", "--workdir", w}, batchToyArgs...)...); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "run", w, "--shard", "1"); code != 0 || !strings.Contains(errs, "shard 1 (toys 50..99) done") {
		t.Fatalf("run: exit %d\n%s\n%s", code, out, errs)
	}
	code, out, errs := runCLI(t, ctx, "batch", "status", w)
	if code != 0 || !strings.Contains(out, "done: 1 of 3 shards (50 of 160 toys)") || !strings.Contains(out, "missing: 0,2") {
		t.Errorf("status: exit %d\n%s\n%s", code, out, errs)
	}
	code, out, errs = runCLI(t, ctx, "batch", "merge", w)
	if code != exitInput || !strings.Contains(errs, "missing: 0,2") {
		t.Errorf("merge with shards missing: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "run-local", w, "--jobs", "2"); code != 0 || !strings.Contains(errs, "shard 1 was done already") {
		t.Fatalf("run-local: exit %d\n%s\n%s", code, out, errs)
	}
	if code, out, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 {
		t.Fatalf("merge: exit %d\n%s\n%s", code, out, errs)
	}
	sameFolders(t, single, filepath.Join(w, "validation"))
}

// TestBatchPlanRefuses: two kinds of ensemble at once are refused with
// the reason.
func TestBatchPlanRefuses(t *testing.T) {
	ctx := context.Background()
	w := t.TempDir()
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--toys", "10", "--replicas", "3"}, "one of --toys N, --response, --replicas N or --variations"},
	} {
		code, _, errs := runCLI(t, ctx, append([]string{"batch", "plan", "a.yaml", "--shards", "2", "--workdir", w}, c.args...)...)
		if code != exitUsage || !strings.Contains(errs, c.want) {
			t.Errorf("%v: exit %d, %s", c.args, code, errs)
		}
	}
}

// fakeSlurm puts an sbatch and an scontrol on PATH that log their
// arguments and the #SBATCH lines of the scripts, print job ids from 101
// on, and state MaxArraySize maxArray. It returns the log's path.
func fakeSlurm(t *testing.T, maxArray string) string {
	bin := t.TempDir()
	log := filepath.Join(bin, "log")
	sb := `#!/bin/sh
n=$(cat "` + bin + `/n" 2>/dev/null || echo 100); n=$((n + 1)); echo $n > "` + bin + `/n"
for a in "$@"; do last="$a"; done
echo "sbatch $* | $(grep '^#SBATCH --array' "$last") | $(grep '^exec' "$last")" >> "` + log + `"
echo "$n"
`
	sc := "#!/bin/sh\necho 'Configuration data as of 2026-12-03T07:00:00'\necho 'MaxArraySize            = " + maxArray + "'\n"
	for name, text := range map[string]string{"sbatch": sb, "scontrol": sc} {
		if err := os.WriteFile(filepath.Join(bin, name), []byte(text), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	t.Setenv("PATH", bin+string(os.PathListSeparator)+os.Getenv("PATH"))
	return log
}

// TestBatchSubmitFake: with a fake Slurm, ten shards on a cluster of
// MaxArraySize 4 go into three arrays (task indices below 4, offsets 0, 4
// and 8) and a merge job depending on all three (afterok); --missing
// submits only the shards without a file; --dry-run submits nothing.
// (Slurm's array indices run from 0 to MaxArraySize − 1: common practice.)
func TestBatchSubmitFake(t *testing.T) {
	ctx := context.Background()
	an := batchDemo(t)
	w := filepath.Join(t.TempDir(), "work")
	if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--toys", "500", "--max-iterations", "2", "--shards", "10", "--workdir", w); code != 0 {
		t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
	}
	log := fakeSlurm(t, "4")
	code, out, errs := runCLI(t, ctx, "batch", "submit", w, "--slurm", "--max-parallel", "2", "--partition", "short")
	if code != 0 {
		t.Fatalf("submit: exit %d\n%s\n%s", code, out, errs)
	}
	if want := "shards 0-3: job 101\nshards 4-7: job 102\nshards 8-9: job 103\nmerge: job 104\n"; out != want {
		t.Errorf("submit printed\n%s\nwant\n%s", out, want)
	}
	b, _ := os.ReadFile(log)
	lines := strings.Split(strings.TrimSpace(string(b)), "\n")
	want := []*regexp.Regexp{
		regexp.MustCompile(`^sbatch --parsable \S+shards-0.sbatch \| #SBATCH --array=0-3%2 \| exec .* batch run .* --shard "\$\(\(0 \+ SLURM_ARRAY_TASK_ID\)\)"$`),
		regexp.MustCompile(`^sbatch --parsable \S+shards-1.sbatch \| #SBATCH --array=0-3%2 \| .*\$\(\(4 \+ SLURM_ARRAY_TASK_ID\)\)"$`),
		regexp.MustCompile(`^sbatch --parsable \S+shards-2.sbatch \| #SBATCH --array=0-1%2 \| .*\$\(\(8 \+ SLURM_ARRAY_TASK_ID\)\)"$`),
		regexp.MustCompile(`^sbatch --parsable --dependency=afterok:101:102:103 --kill-on-invalid-dep=yes \S+merge.sbatch \|  \| exec .* batch merge `),
	}
	if len(lines) != len(want) {
		t.Fatalf("sbatch calls:\n%s", b)
	}
	for i, re := range want {
		if !re.MatchString(lines[i]) {
			t.Errorf("sbatch call %d:\n%s\nwant %s", i, lines[i], re)
		}
	}
	if s, _ := os.ReadFile(filepath.Join(w, "slurm", "shards-0.sbatch")); !strings.Contains(string(s), "#SBATCH --partition=short\n") {
		t.Errorf("array script:\n%s", s)
	}

	for _, s := range []string{"0", "1", "5"} {
		if code, out, errs := runCLI(t, ctx, "batch", "run", w, "--shard", s, "-q"); code != 0 {
			t.Fatalf("run %s: exit %d\n%s\n%s", s, code, out, errs)
		}
	}
	os.Remove(log)
	code, out, errs = runCLI(t, ctx, "batch", "submit", w, "--slurm", "--missing")
	if want := "shards 2-3: job 105\nshards 4,6-7: job 106\nshards 8-9: job 107\nmerge: job 108\n"; code != 0 || out != want {
		t.Errorf("submit --missing: exit %d\n%s\nwant\n%s\n%s", code, out, want, errs)
	}
	b, _ = os.ReadFile(log)
	if !strings.Contains(string(b), "--array=2-3 |") || !strings.Contains(string(b), "--array=0,2-3 |") || !strings.Contains(string(b), "afterok:105:106:107") {
		t.Errorf("sbatch calls of --missing:\n%s", b)
	}
	os.Remove(log)
	code, out, _ = runCLI(t, ctx, "batch", "submit", w, "--slurm", "--dry-run")
	if _, err := os.Stat(log); code != 0 || err == nil || !strings.Contains(out, "#SBATCH --array=0-3\n") || !strings.Contains(out, "batch merge") {
		t.Errorf("dry run: exit %d (sbatch called: %v)\n%s", code, err == nil, out)
	}
}

// TestBatchResponse: a response plan's parts built here and merged give
// the bundle "desmear response" writes in one run, byte for byte (the
// determinism rule of DEVELOPERS.md), for 3 parts and for more parts than
// response shards (empty parts).
func TestBatchResponse(t *testing.T) {
	ctx := context.Background()
	an := batchDemo(t)
	defer func(n int64) { shardEvents = n }(shardEvents)
	shardEvents = 3000 // several response shards per sample
	tmp := t.TempDir()
	single := filepath.Join(tmp, "single")
	if code, out, errs := runCLI(t, ctx, "response", an, "--out", single, "-q"); code != 0 {
		t.Fatalf("response: exit %d\n%s\n%s", code, out, errs)
	}
	for _, k := range []string{"3", "40"} {
		w := filepath.Join(tmp, "work"+k)
		if code, out, errs := runCLI(t, ctx, "batch", "plan", an, "--response", "--shards", k, "--workdir", w); code != 0 {
			t.Fatalf("plan: exit %d\n%s\n%s", code, out, errs)
		}
		if code, out, errs := runCLI(t, ctx, "batch", "run", w, "--shard", "1", "-q"); code != 0 {
			t.Fatalf("run: exit %d\n%s\n%s", code, out, errs)
		}
		code, out, errs := runCLI(t, ctx, "batch", "merge", w)
		if code != exitInput || !strings.Contains(errs, "missing: 0,2") {
			t.Errorf("merge with parts missing: exit %d\n%s\n%s", code, out, errs)
		}
		if code, out, errs := runCLI(t, ctx, "batch", "run-local", w, "--jobs", "2"); code != 0 || !strings.Contains(errs, "response part 1 was done already") {
			t.Fatalf("run-local: exit %d\n%s\n%s", code, out, errs)
		}
		code, out, errs = runCLI(t, ctx, "batch", "status", w)
		if code != 0 || !strings.Contains(out, "done: "+k+" of "+k+" shards") {
			t.Errorf("status: exit %d\n%s\n%s", code, out, errs)
		}
		if code, out, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 {
			t.Fatalf("merge: exit %d\n%s\n%s", code, out, errs)
		}
		sameFolders(t, single, filepath.Join(w, "response"))
	}
}
