package main

import (
	"context"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/batch"
)

// The response built in parts (--shard I/N) and merged is the response of
// one run, byte for byte (the shard merge is ordered, method.md has no
// formula for it: the reference is the single run itself, built by the
// other path); merges of parts that miss or repeat shards, or come from
// another analysis file, are refused with the shards listed.
func TestResponseShards(t *testing.T) {
	defer func(n int64) { shardEvents = n }(shardEvents)
	shardEvents = 3000 // 20000 events: 7 shards, the last of 2000
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	whole := filepath.Join(dir, "whole")
	if code, _, stderr := runCLI(t, context.Background(), "response", path, "--out", whole); code != 0 {
		t.Fatalf("response: exit %d\n%s", code, stderr)
	}
	for _, n := range []int{1, 3, 7, 9} {
		var parts []string
		for i := 0; i < n; i++ {
			part := filepath.Join(dir, "parts", strings.Repeat("p", n)+string(rune('a'+i)))
			code, stdout, stderr := runCLI(t, context.Background(), "response", path, "--shard", itoa(i)+"/"+itoa(n), "--out", part)
			if code != 0 || !strings.Contains(stdout, "of the 7 shards") {
				t.Fatalf("--shard %d/%d: exit %d\n%s%s", i, n, code, stdout, stderr)
			}
			parts = append(parts, part)
		}
		merged := filepath.Join(dir, "merged"+itoa(n))
		args := append(append([]string{"response", "merge"}, parts...), "--out", merged)
		code, stdout, stderr := runCLI(t, context.Background(), args...)
		if code != 0 || !strings.Contains(stdout, "7 shards from") || !strings.Contains(stdout, "events read:        20000") {
			t.Fatalf("merge of %d parts: exit %d\n%s%s", n, code, stdout, stderr)
		}
		for _, f := range []string{"response.json", "migrations.dsm", "manifest.sha256"} {
			a, _ := os.ReadFile(filepath.Join(whole, f))
			b, _ := os.ReadFile(filepath.Join(merged, f))
			if len(a) == 0 || string(a) != string(b) {
				t.Errorf("%d parts: merged %s differs from the single run's", n, f)
			}
		}
		if n != 3 {
			continue
		}
		// Part 1 of 3 holds shards 2 and 3 (PartShards: [7/3, 14/3)).
		for _, c := range []struct {
			parts []string
			want  string
		}{
			{[]string{parts[0], parts[2]}, "2 of the 7 shards missing: 2 ("},
			{[]string{parts[0], parts[1], parts[1], parts[2]}, "2 shards given more than once: 2 ("},
			{[]string{parts[0], parts[2]}, "3 ("},
		} {
			args := append(append([]string{"response", "merge"}, c.parts...), "--out", filepath.Join(dir, "bad"))
			code, _, stderr := runCLI(t, context.Background(), args...)
			if code != exitInput || !strings.Contains(stderr, c.want) {
				t.Errorf("merge %v: exit %d, %s; want %q", c.parts, code, stderr, c.want)
			}
		}
		args = append(append([]string{"response", "merge"}, parts[0], parts[1], parts[1]), "--out", filepath.Join(dir, "bad"))
		if _, _, stderr := runCLI(t, context.Background(), args...); !strings.Contains(stderr, parts[1]+" and "+parts[1]) {
			t.Errorf("a duplicated part is not named: %s", stderr)
		}
		// A part built from another analysis file (here: an added comment).
		text, _ := os.ReadFile(path)
		other := filepath.Join(dir, "other.yaml")
		os.WriteFile(other, append(text, []byte("\n# another\n")...), 0o644)
		if code, _, stderr := runCLI(t, context.Background(), "response", other, "--shard", "1/3", "--out", filepath.Join(dir, "otherpart")); code != 0 {
			t.Fatalf("part of the other analysis: exit %d %s", code, stderr)
		}
		args = []string{"response", "merge", parts[0], filepath.Join(dir, "otherpart"), parts[2], "--out", filepath.Join(dir, "bad")}
		if code, _, stderr := runCLI(t, context.Background(), args...); code != exitInput || !strings.Contains(stderr, "the analysis file differ") {
			t.Errorf("merge with a part of another analysis: exit %d, %s", code, stderr)
		}
		if _, err := os.Stat(filepath.Join(dir, "bad")); err == nil {
			t.Error("a refused merge left a bundle")
		}
	}
	for _, bad := range []string{"3/3", "-1/2", "1", "a/b", "0/0"} {
		if code, _, stderr := runCLI(t, context.Background(), "response", path, "--shard", bad, "--out", filepath.Join(dir, "x")); code != exitUsage || !strings.Contains(stderr, "give I/N") {
			t.Errorf("--shard %s: exit %d, %s", bad, code, stderr)
		}
	}
	if code, _, _ := runCLI(t, context.Background(), "response", path, "--shard", "0/2"); code != exitUsage {
		t.Errorf("--shard without --out: exit %d", code)
	}
	if code, _, _ := runCLI(t, context.Background(), "response", "merge", filepath.Join(dir, "whole")); code != exitUsage {
		t.Errorf("merge without --out: exit %d", code)
	}
}

func itoa(i int) string { return strconv.Itoa(i) }

// TestResponseMergesPrintAlike: the merge of a response plan and
// "desmear response merge" of the same parts into the same bundle print
// the same summary (the merged bundle is the one "desmear response"
// writes, "desmear help cluster"), naming the bundle and the 7 shards of
// the 3 parts.
func TestResponseMergesPrintAlike(t *testing.T) {
	defer func(n int64) { shardEvents = n }(shardEvents)
	shardEvents = 3000 // 20000 events: 7 shards
	ctx := context.Background()
	path := writeCLIAnalysis(t)
	w := filepath.Join(filepath.Dir(path), "work")
	out := filepath.Join(w, "response")
	for _, args := range [][]string{{"batch", "plan", path, "--response", "--shards", "3", "--workdir", w}, {"batch", "run-local", w, "-q"}} {
		if code, so, errs := runCLI(t, ctx, args...); code != 0 {
			t.Fatalf("%v: exit %d\n%s\n%s", args, code, so, errs)
		}
	}
	code, want, errs := runCLI(t, ctx, "batch", "merge", w)
	if code != 0 || !strings.HasPrefix(want, "response: "+out+" (7 shards from 3 parts)\n") || !strings.Contains(want, "events read:        20000") {
		t.Fatalf("batch merge: exit %d\n%s\n%s", code, want, errs)
	}
	args := []string{"response", "merge"}
	for s := range 3 {
		args = append(args, batch.PartPath(w, s))
	}
	code, got, errs := runCLI(t, ctx, append(args, "--out", out, "--force")...)
	if code != 0 || got != want {
		t.Errorf("response merge: exit %d\n%s\n%s\nwant\n%s", code, got, errs, want)
	}
}
