package main

import (
	"bufio"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"flag"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// updateGolden rewrites testdata/golden.sha256 from the outputs of this
// build: go test ./cmd/desmear -run Golden -update. Do it only in a
// commit whose message says which outputs change and why.
var updateGolden = flag.Bool("update", false, "rewrite testdata/golden.sha256 from this build's outputs")

const goldenFile = "testdata/golden.sha256"

// goldenRuns are the command lines whose outputs must stay bit-identical
// across refactorings: the demo, the response with its tables, and the
// plain-table mode over those tables with the settings that take
// different paths through the code. DIR is the test's folder.
var goldenRuns = []struct {
	name string
	args []string
}{
	{"demo", []string{"demo", "--out", "DIR/demo", "--events", "100000"}},
	{"stress", []string{"unfold", "DIR/demo/stress-test.yaml"}},
	{"response", []string{"response", "DIR/demo/analysis.yaml", "--out", "DIR/resp", "--tables", "DIR/tabs"}},
	{"plain-full", []string{"unfold", "--response", "DIR/tabs/response.csv", "--generated", "DIR/tabs/generated.csv", "--data", "DIR/n.csv",
		"--background", "DIR/tabs/background.csv", "--truth-binning", "DIR/demo/truth-binning.yaml", "--covariance", "full", "--out", "DIR/plain-full"}},
	{"plain-subtract-chi2", []string{"unfold", "--response", "DIR/tabs/response.csv", "--generated", "DIR/tabs/generated.csv", "--data", "DIR/n.csv",
		"--background", "DIR/tabs/background.csv", "--background-mode", "subtract", "--stop-chi2", "0.5", "--out", "DIR/plain-subtract"}},
	{"plain-smooth", []string{"unfold", "--response", "DIR/tabs/response.csv", "--generated", "DIR/tabs/generated.csv", "--data", "DIR/n.csv",
		"--truth-binning", "DIR/demo/truth-binning.yaml", "--smooth", "0.5", "--iterations", "6", "--covariance", "full", "--out", "DIR/plain-smooth"}},
	{"plain-probes", []string{"unfold", "--response", "DIR/tabs/response.csv", "--generated", "DIR/tabs/generated.csv", "--data", "DIR/n.csv",
		"--background", "DIR/tabs/background.csv", "--diagonal-method", "probes", "--probes", "40", "--seed", "7", "--out", "DIR/plain-probes"}},
	{"plain-toys", []string{"unfold", "--response", "DIR/tabs/response.csv", "--generated", "DIR/tabs/generated.csv", "--data", "DIR/n.csv",
		"--diagonal-method", "toys", "--toys", "30", "--seed", "3", "--iterations", "3", "--out", "DIR/plain-toys"}},
}

// rootSHA matches the size and content hash recorded for an input ROOT
// file in a result.json or response.json: ROOT files carry their write
// times and their own path, so both change from run to run.
var rootSHA = regexp.MustCompile(`("path": "[^"]*\.root",\s*"bytes": )\d+(,\s*"sha256": ")[0-9a-f]{64}"`)

// rootShardSHA matches the content hash recorded for the shards of an
// input ROOT file in a response bundle.
var rootShardSHA = regexp.MustCompile(`("file": "[^"]*\.root",\s*"sha256": ")[0-9a-f]{64}"`)

// rootSHAHTML matches the same in the inputs table of a report.html.
var rootSHAHTML = regexp.MustCompile(`(\.root</code></td><td class="num">)\d+(</td><td><code>)[0-9a-f]{64}`)

// TestGolden runs goldenRuns and compares the SHA-256 of every file they
// write and of what they print with testdata/golden.sha256, recorded
// from an earlier build: a refactoring must not change a bit of any
// output. ROOT files are left out (they record their write times), so
// are response bundle manifests (sums over files naming the test's folder), and
// so are the hashes of ROOT inputs inside the JSON files and report pages; the test's folder
// is written DIR wherever it appears. The hashes hold for amd64 (other
// architectures may fuse multiply-adds).
func TestGolden(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the demo")
	}
	dir := t.TempDir()
	ctx := context.Background()
	got := map[string]string{}
	for _, r := range goldenRuns {
		args := make([]string, len(r.args))
		for i, a := range r.args {
			args[i] = strings.ReplaceAll(a, "DIR", dir)
		}
		code, stdout, stderr := runCLI(t, ctx, args...)
		if code != 0 {
			t.Fatalf("%s: exit %d\n%s", r.name, code, stderr)
		}
		got["stdout "+r.name] = digest([]byte(strings.ReplaceAll(stdout, dir, "DIR")))
		if r.name == "response" {
			writeGoldenData(t, dir)
		}
	}
	err := filepath.WalkDir(dir, func(path string, d fs.DirEntry, err error) error {
		// A bundle's manifest holds the sums of its other files, which
		// name the test's folder; those files are compared instead.
		if err != nil || d.IsDir() || strings.HasSuffix(path, ".root") || d.Name() == "manifest.sha256" {
			return err
		}
		b, err := os.ReadFile(path)
		if err != nil {
			return err
		}
		// Paths name the test's folder.
		b = bytes.ReplaceAll(b, []byte(dir), []byte("DIR"))
		if strings.HasSuffix(path, ".json") {
			b = rootSHA.ReplaceAll(b, []byte(`${1}0${2}ROOT"`))
			b = rootShardSHA.ReplaceAll(b, []byte(`${1}ROOT"`))
		}
		if strings.HasSuffix(path, ".html") {
			b = rootSHAHTML.ReplaceAll(b, []byte(`${1}0${2}ROOT`))
		}
		rel, _ := filepath.Rel(dir, path)
		got[filepath.ToSlash(rel)] = digest(b)
		return nil
	})
	if err != nil {
		t.Fatal(err)
	}
	if *updateGolden {
		var b strings.Builder
		keys := make([]string, 0, len(got))
		for k := range got {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		for _, k := range keys {
			fmt.Fprintf(&b, "%s  %s\n", got[k], k)
		}
		if err := os.WriteFile(goldenFile, []byte(b.String()), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want := readGolden(t)
	for k, w := range want {
		if g, ok := got[k]; !ok {
			t.Errorf("%s: not written any more", k)
		} else if g != w {
			t.Errorf("%s: content changed (sha256 %s, recorded %s)", k, g, w)
		}
	}
	for k := range got {
		if _, ok := want[k]; !ok {
			t.Errorf("%s: a new output not in %s", k, goldenFile)
		}
	}
}

// writeGoldenData writes DIR/n.csv, the plain-table runs' data: the demo
// result's folded expectation rounded to whole counts.
func writeGoldenData(t *testing.T, dir string) {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "demo", "result", "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	var doc struct {
		Folded []float64 `json:"folded"`
	}
	if err := json.Unmarshal(b, &doc); err != nil {
		t.Fatal(err)
	}
	var s strings.Builder
	s.WriteString("reco,value\n")
	for i, v := range doc.Folded {
		fmt.Fprintf(&s, "%d,%s\n", i, strconv.FormatFloat(float64(int64(v+0.5)), 'g', -1, 64))
	}
	if err := os.WriteFile(filepath.Join(dir, "n.csv"), []byte(s.String()), 0o644); err != nil {
		t.Fatal(err)
	}
}

func readGolden(t *testing.T) map[string]string {
	t.Helper()
	f, err := os.Open(goldenFile)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	want := map[string]string{}
	sc := bufio.NewScanner(f)
	for sc.Scan() {
		h, name, ok := strings.Cut(sc.Text(), "  ")
		if !ok {
			t.Fatalf("%s: malformed line %q", goldenFile, sc.Text())
		}
		want[name] = h
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return want
}

func digest(b []byte) string {
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:])
}
