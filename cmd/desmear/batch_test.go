package main

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/batch"
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

// demoEdit changes the demo's analysis file b.
type demoEdit func(t *testing.T, b []byte) []byte

// batchDemo writes a small demo and returns its analysis file, with
// each of edits (withVariations, withReplicas) applied to it in turn.
func batchDemo(t *testing.T, edits ...demoEdit) string {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "demo")
	if code, stdout, stderr := runCLI(t, context.Background(), "demo", "--out", dir, "--events", "20000", "--no-report", "-q"); code != 0 {
		t.Fatalf("demo: exit %d\n%s\n%s", code, stdout, stderr)
	}
	an := filepath.Join(dir, "analysis.yaml")
	if len(edits) == 0 {
		return an
	}
	b, err := os.ReadFile(an)
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range edits {
		b = e(t, b)
	}
	if err := os.WriteFile(an, b, 0o644); err != nil {
		t.Fatal(err)
	}
	return an
}

// sameFolders fails unless the folders hold the same files, byte for
// byte, in their subfolders too, result.root aside (ROOT files record
// their write time: only its presence is checked).
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
		if e.IsDir() {
			sameFolders(t, filepath.Join(want, e.Name()), filepath.Join(got, e.Name()))
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

// batchToyArgs are the toy settings shared by the single run and the plans.
var batchToyArgs = []string{"--toys", "160", "--max-iterations", "3", "--seed", "5"}

// batchKind is a kind of plan in TestBatchKinds: how its single run is
// made and what its commands say.
type batchKind struct {
	name string
	// single writes the demo's analysis file and runs it in one
	// process, returning the analysis file and the folder written.
	single func(t *testing.T, tmp string) (an, folder string)
	// plan are the kind's options of "batch plan"; out is set when the
	// merge writes the folder named with --out, not the work folder's.
	plan []string
	out  bool
	// splits are the numbers of shards planned; the shard run first is
	// the last one when runLast is set, else shard 1.
	splits  []string
	runLast bool
	// planned is what the plan says of K shards; ran what the note of
	// the run of the first shard says after "shard I ".
	planned func(k string) string
	ran     string
	// slow is set when the kind runs "desmear unfold" on the demo
	// (skipped with -short).
	slow bool
	// part is the shard's name in the notes ("shard", "response part").
	part string
	// members is what the status says of the members with every shard
	// done ("(160 of 160 toys)"), partial with shard I of K done (key
	// "K/I"), where checked.
	members string
	partial map[string]string
	// wrote is the first word of what the merge prints ("result").
	wrote string
	// then checks more of the kind with its analysis file and single run.
	then func(t *testing.T, an, single, tmp string)
}

// batchToys, batchResponse, batchVariations and batchReplicas are the
// kinds of plan.
var (
	batchToys = batchKind{
		name: "toys",
		single: func(t *testing.T, tmp string) (string, string) {
			an, single := batchDemo(t), filepath.Join(tmp, "single")
			if code, out, errs := runCLI(t, context.Background(), append([]string{"validate", an, "--out", single, "-q"}, batchToyArgs...)...); code != 0 {
				t.Fatalf("validate: exit %d\n%s\n%s", code, out, errs)
			}
			return an, single
		},
		plan: batchToyArgs, splits: []string{"3"},
		planned: func(k string) string { return "(160 toys in 4 units of up to 50, " + k + " shards)" },
		ran:     "(toys 50..99) done",
		part:    "shard",
		members: " (160 of 160 toys)", partial: map[string]string{"3/1": " (50 of 160 toys)"},
		wrote: "validation",
	}
	batchResponse = batchKind{
		name: "response",
		single: func(t *testing.T, tmp string) (string, string) {
			an, single := batchDemo(t), filepath.Join(tmp, "single")
			if code, out, errs := runCLI(t, context.Background(), "response", an, "--out", single, "-q"); code != 0 {
				t.Fatalf("response: exit %d\n%s\n%s", code, out, errs)
			}
			return an, single
		},
		// 3 parts, and more parts than response shards (empty parts)
		plan: []string{"--response"}, splits: []string{"3", "40"},
		planned: func(k string) string { return "(the response in " + k + " parts)" },
		ran:     "(",
		part:    "response part",
		wrote:   "response",
	}
	batchVariations = batchKind{
		name:   "variations",
		single: unfoldSingle([]demoEdit{withVariations}, "sources.csv", "shifts.csv", `"pt-scale"`),
		plan:   []string{"--variations"}, out: true, slow: true,
		// 1 shard, as many shards as variations and an uneven split (1
		// and 2); the last shard run first
		splits: []string{"1", "3", "2"}, runLast: true,
		planned: func(k string) string { return "(3 systematic variations in " + k + " shards)" },
		ran:     "(variations",
		part:    "shard",
		// shard 0 of 2 holds pt-tilt, shard 1 pt-scale and y-tilt
		members: " (3 of 3 variations)", partial: map[string]string{"2/1": " (2 of 3 variations)"},
		wrote: "result",
	}
	batchReplicas = batchKind{
		name:   "replicas",
		single: unfoldSingle([]demoEdit{withReplicas, withVariations}, `"bootstrap-replicas"`, `"pt-scale"`),
		plan:   []string{"--replicas", "120"}, out: true, slow: true,
		// 1 shard, as many shards as units (50, 50, 20 replicas) and an
		// uneven split (1 and 2 units); the last shard run first
		splits: []string{"1", "3", "2"}, runLast: true,
		planned: func(k string) string { return "(120 bootstrap replicas in 3 units of up to 50, " + k + " shards)" },
		ran:     "(replicas",
		part:    "shard",
		// shard 0 of 2 holds replicas 0..49, shard 1 replicas 50..119
		members: " (120 of 120 replicas)", partial: map[string]string{"2/1": " (70 of 120 replicas)"},
		wrote: "result",
		then:  replicasThen,
	}
)

// unfoldSingle writes the demo with edits and unfolds it in one run
// with "desmear unfold ANALYSIS.yaml"; the result folder must hold each
// of want: a file, or (quoted) a word of result.json.
func unfoldSingle(edits []demoEdit, want ...string) func(t *testing.T, tmp string) (string, string) {
	return func(t *testing.T, tmp string) (string, string) {
		an := batchDemo(t, edits...)
		if code, out, errs := runCLI(t, context.Background(), "unfold", an, "--force", "-q"); code != 0 {
			t.Fatalf("unfold: exit %d\n%s\n%s", code, out, errs)
		}
		single := filepath.Join(filepath.Dir(an), "result")
		js, _ := os.ReadFile(filepath.Join(single, "result.json"))
		for _, w := range want {
			if strings.HasPrefix(w, `"`) {
				if !bytes.Contains(js, []byte(w)) {
					t.Fatalf("result.json of the single run has no %s", w)
				}
			} else if _, err := os.Stat(filepath.Join(single, w)); err != nil {
				t.Fatalf("the single run wrote no %s: %v", w, err)
			}
		}
		return an, single
	}
}

// TestBatchKinds: for every kind of plan, the shards run here and
// merged write the folder of the single run byte for byte (the
// validation folder of "desmear validate", the bundle of "desmear
// response", the result folder of "desmear unfold ANALYSIS.yaml": the
// determinism rule of DEVELOPERS.md, the same bits for any split of the
// work; for the replicas, the units' ensembles merged in the same order
// as one run merges them, Chan, Golub and LeVeque, STAN-CS-79-773,
// 1979); a finished shard is not run again, status reads the shard
// files and counts the members, and a merge with a shard missing is
// refused naming it.
func TestBatchKinds(t *testing.T) {
	for _, c := range []batchKind{batchToys, batchResponse, batchVariations, batchReplicas} {
		t.Run(c.name, func(t *testing.T) {
			if testing.Short() && c.slow {
				t.Skip("runs the demo")
			}
			if c.name == "response" {
				defer func(n int64) { shardEvents = n }(shardEvents)
				shardEvents = 3000 // several response shards per sample
			}
			ctx := context.Background()
			tmp := t.TempDir()
			an, single := c.single(t, tmp)
			for _, k := range c.splits {
				w, out := filepath.Join(tmp, "work"+k), filepath.Join(tmp, "result"+k)
				plan := append(append([]string{"batch", "plan", an}, c.plan...), "--shards", k, "--workdir", w)
				if c.out {
					plan = append(plan, "--out", out)
				} else {
					out = filepath.Join(w, c.wrote)
				}
				if code, so, errs := runCLI(t, ctx, plan...); code != 0 || !strings.Contains(so, c.planned(k)) {
					t.Fatalf("plan %s: exit %d\n%s\n%s", k, code, so, errs)
				}
				s := "1"
				if c.runLast {
					s = strconv.Itoa(atoi(t, k) - 1)
				}
				if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", s); code != 0 || !strings.Contains(errs, c.part+" "+s+" "+c.ran) {
					t.Fatalf("run %s: exit %d\n%s\n%s", k, code, so, errs)
				}
				if code, so, errs := runCLI(t, ctx, "batch", "run", w, "--shard", s); code != 0 || !strings.Contains(errs, c.part+" "+s+" was done already") {
					t.Errorf("run %s again: exit %d\n%s\n%s", k, code, so, errs)
				}
				if k != "1" {
					var missing []int
					for i := range atoi(t, k) {
						if strconv.Itoa(i) != s {
							missing = append(missing, i)
						}
					}
					m := "missing: " + batch.Ranges(missing)
					code, so, errs := runCLI(t, ctx, "batch", "status", w)
					if code != 0 || !strings.Contains(so, "done: 1 of "+k+" shards"+c.partial[k+"/"+s]) || !strings.Contains(so, m+"\n") {
						t.Errorf("status: exit %d\n%s\n%s", code, so, errs)
					}
					code, so, errs = runCLI(t, ctx, "batch", "merge", w)
					if code != exitInput || !strings.Contains(errs, m) {
						t.Errorf("merge with shards missing: exit %d\n%s\n%s", code, so, errs)
					}
				}
				code, so, errs := runCLI(t, ctx, "batch", "run-local", w, "--jobs", "2")
				if code != 0 || !strings.Contains(errs, c.part+" "+s+" was done already") {
					t.Fatalf("run-local %s: exit %d\n%s\n%s", k, code, so, errs)
				}
				code, so, errs = runCLI(t, ctx, "batch", "status", w)
				if code != 0 || !strings.Contains(so, "done: "+k+" of "+k+" shards"+c.members) {
					t.Errorf("status %s: exit %d\n%s\n%s", k, code, so, errs)
				}
				if code, so, errs := runCLI(t, ctx, "batch", "merge", w, "-q"); code != 0 || !strings.Contains(so, c.wrote+": "+out) {
					t.Fatalf("merge %s: exit %d\n%s\n%s", k, code, so, errs)
				}
				sameFolders(t, single, out)
			}
			if c.then != nil {
				c.then(t, an, single, tmp)
			}
		})
	}
}

// atoi is strconv.Atoi for numbers the test writes.
func atoi(t *testing.T, s string) int {
	t.Helper()
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

// TestBatchPlanRefuses: two kinds of ensemble at once, options of
// another kind, more shards than units, a plan of what the analysis file
// does not have (no systematic variations, another number of bootstrap
// replicas) are refused with the reason.
func TestBatchPlanRefuses(t *testing.T) {
	ctx := context.Background()
	w := filepath.Join(t.TempDir(), "work")
	demos := map[string]string{"none": "a.yaml"}
	demo := func(name string) string {
		if demos[name] == "" {
			if testing.Short() {
				t.Skip("writes the demo")
			}
			edits := map[string][]demoEdit{"plain": nil, "variations": {withVariations}, "replicas": {withReplicas}}[name]
			demos[name] = batchDemo(t, edits...)
		}
		return demos[name]
	}
	for _, c := range []struct {
		demo string
		args []string
		want []string
	}{
		{"none", []string{"--toys", "10", "--replicas", "3"}, []string{"one of --toys N, --response, --replicas N or --variations"}},
		{"plain", []string{"--toys", "160", "--max-iterations", "2", "--shards", "5"}, []string{"--shards 5:", "160 toys: a shard holds at least one block of 50 toys, so at most 4 shards"}},
		{"plain", []string{"--response", "--seed", "2"}, []string{"--seed is an option of a toy ensemble (--toys N), not of --response"}},
		{"plain", []string{"--variations"}, []string{"has no systematic variations"}},
		{"variations", []string{"--variations", "--seed", "3"}, []string{"--seed is an option of a toy ensemble"}},
		{"variations", []string{"--variations", "--shards", "4"}, []string{"3 systematic variations", "give at most 3"}},
		{"plain", []string{"--replicas", "120"}, []string{"asks for no bootstrap replicas (uncertainty.replicas)"}},
		{"replicas", []string{"--replicas", "100"}, []string{"asks for 120 bootstrap replicas (uncertainty.replicas): plan with --replicas 120"}},
		{"replicas", []string{"--replicas", "120", "--shards", "4"}, []string{"are 3 units of up to 50"}},
		{"replicas", []string{"--replicas", "1"}, []string{"--replicas 1: give at least 2"}},
		{"replicas", []string{"--replicas", "120", "--seed", "2"}, []string{"--seed is an option of a toy ensemble"}},
	} {
		// the last --shards counts
		args := append([]string{"batch", "plan", demo(c.demo), "--shards", "1", "--workdir", w}, c.args...)
		code, _, errs := runCLI(t, ctx, args...)
		if code != exitUsage {
			t.Errorf("%v: exit %d, %s", c.args, code, errs)
		}
		for _, want := range c.want {
			if !strings.Contains(errs, want) {
				t.Errorf("%v: %s, want %q", c.args, errs, want)
			}
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
