package main

import (
	"bytes"
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/demo"
	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/result"
)

// demoTestEvents keeps the command's tests small (well under a second
// per run).
const demoTestEvents = "150000"

// The command generates the inputs, runs the analysis and prints the
// table of every in-range truth bin with the chi-square line; it refuses
// to overwrite without --force, replaces an earlier demo with it, and
// never touches a folder that is not a demo folder.
func TestDemoCommand(t *testing.T) {
	ctx := context.Background()
	dir := filepath.Join(t.TempDir(), "zeton")
	code, stdout, stderr := runCLI(t, ctx, "demo", "--out", dir, "--events", demoTestEvents, "--seed", "3")
	if code != 0 {
		t.Fatalf("exit %d\nstdout:\n%s\nstderr:\n%s", code, stdout, stderr)
	}
	s := demo.TruthScheme()
	for g := range s.InRange() {
		if !strings.Contains(stdout, s.Label(g)) {
			t.Errorf("the table has no row for %s", s.Label(g))
		}
	}
	for _, want := range []string{"invented data", "chi2/ndf", "total covariance", "data (linearised), simulation (dirichlet-samples)", "results: " + filepath.Join(dir, demo.ResultFolder), "seed 3"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("stdout lacks %q:\n%s", want, stdout)
		}
	}
	if strings.Contains(stdout, "(-inf,") {
		t.Errorf("the table shows flow bins:\n%s", stdout)
	}
	if !strings.Contains(stderr, "generating") {
		t.Errorf("no diagnostics on stderr: %q", stderr)
	}
	// The table's unfolded values are those of result.json.
	doc := readDemoResult(t, dir)
	rows := 0
	for _, line := range strings.Split(stdout, "\n") {
		f := strings.Fields(line)
		pm := slices.Index(f, "±")
		if len(f) < 10 || pm < 2 || pm+4 != len(f)-1 {
			continue
		}
		g, err := strconv.Atoi(f[0])
		if err != nil {
			continue
		}
		rows++
		v, _ := strconv.ParseFloat(f[pm-1], 64)
		if want := doc.Estimate[g]; strconv.FormatFloat(want, 'f', 1, 64) != f[pm-1] {
			t.Errorf("bin %d: table %v, result.json %v", g, v, want)
		}
		// The total is the quadratic sum of the data and simulation
		// columns (method.md §18 Sources of uncertainty and their total),
		// to the printed rounding.
		tot, _ := strconv.ParseFloat(f[pm+1], 64)
		d, _ := strconv.ParseFloat(f[pm+2], 64)
		sim, _ := strconv.ParseFloat(f[pm+3], 64)
		if !(sim > 0) || math.Abs(tot-math.Hypot(d, sim)) > 0.1 {
			t.Errorf("bin %d: total %v, data %v, simulation %v", g, tot, d, sim)
		}
	}
	if rows != s.InRange() {
		t.Errorf("%d table rows, want %d", rows, s.InRange())
	}

	code, _, stderr = runCLI(t, ctx, "demo", "--out", dir, "--events", demoTestEvents)
	if code != exitUsage || !strings.Contains(stderr, "--force") {
		t.Errorf("existing folder without --force: exit %d, stderr %q", code, stderr)
	}
	code, _, stderr = runCLI(t, ctx, "demo", "--out", dir, "--events", demoTestEvents, "--force", "--quiet")
	if code != 0 || stderr != "" {
		t.Errorf("--force --quiet: exit %d, stderr %q", code, stderr)
	}

	foreign := filepath.Join(t.TempDir(), "thesis")
	os.Mkdir(foreign, 0o755)
	os.WriteFile(filepath.Join(foreign, "chapter1.tex"), []byte("keep"), 0o644)
	code, _, stderr = runCLI(t, ctx, "demo", "--out", foreign, "--events", demoTestEvents, "--force")
	if code != exitUsage || !strings.Contains(stderr, "left alone") {
		t.Errorf("--force on a folder that is not a demo folder: exit %d, stderr %q", code, stderr)
	}
	if b, err := os.ReadFile(filepath.Join(foreign, "chapter1.tex")); err != nil || string(b) != "keep" {
		t.Error("the foreign folder was touched")
	}
	for _, args := range [][]string{
		{"demo", "--events", "5"},
		{"demo", "--events", "x"},
		{"demo", "--out", ""},
		{"demo", "extra"},
	} {
		if code, _, stderr := runCLI(t, ctx, args...); code != exitUsage {
			t.Errorf("%q: exit %d, want %d (%s)", args, code, exitUsage, stderr)
		}
	}
}

type demoResultJSON struct {
	Inputs     []inputs.File `json:"inputs"`
	Estimate   []float64     `json:"estimate"`
	Covariance [][]float64   `json:"covariance"`
}

func readDemoResult(t *testing.T, dir string) *demoResultJSON {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, demo.ResultFolder, result.JSONFile))
	if err != nil {
		t.Fatal(err)
	}
	var r demoResultJSON
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return &r
}

// Determinism (a design rule of the project): the demo run twice with the
// same seed, once with GOMAXPROCS=1 and once with 2, prints the same
// table and writes the same result bits. result.json differs only in the
// size and content hash of the ROOT simulation file, because the ROOT
// format stores the time of writing (compressed, so even the size can
// change by a few bytes); every other file of the result is
// byte-identical.
func TestDemoDeterministic(t *testing.T) {
	ctx := context.Background()
	prev := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(prev)
	var outs []string
	var dirs []string
	for _, procs := range []int{1, 2} {
		base := t.TempDir()
		t.Chdir(base)
		runtime.GOMAXPROCS(procs)
		code, stdout, stderr := runCLI(t, ctx, "demo", "--out", "demo", "--events", demoTestEvents, "--seed", "11")
		if code != 0 {
			t.Fatalf("GOMAXPROCS=%d: exit %d\n%s", procs, code, stderr)
		}
		outs = append(outs, stdout)
		dirs = append(dirs, filepath.Join(base, "demo"))
	}
	runtime.GOMAXPROCS(prev)
	if outs[0] != outs[1] {
		t.Errorf("stdout differs between GOMAXPROCS=1 and 2:\n%s\n---\n%s", outs[0], outs[1])
	}
	entries, err := os.ReadDir(filepath.Join(dirs[0], demo.ResultFolder))
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		name := e.Name()
		a, _ := os.ReadFile(filepath.Join(dirs[0], demo.ResultFolder, name))
		b, _ := os.ReadFile(filepath.Join(dirs[1], demo.ResultFolder, name))
		switch {
		case filepath.Ext(name) == ".root":
			// ROOT files record their write time.
		case name == result.JSONFile:
			ra, rb := readDemoResult(t, dirs[0]), readDemoResult(t, dirs[1])
			if !sameFloats(ra.Estimate, rb.Estimate) || len(ra.Covariance) == 0 || len(ra.Covariance) != len(rb.Covariance) {
				t.Errorf("result.json estimates differ")
			}
			for i := range ra.Covariance {
				if !sameFloats(ra.Covariance[i], rb.Covariance[i]) {
					t.Errorf("result.json covariance row %d differs", i)
				}
			}
			for i, in := range ra.Inputs {
				if in.Path != rb.Inputs[i].Path || (in.SHA256 != rb.Inputs[i].SHA256 || in.Bytes != rb.Inputs[i].Bytes) && filepath.Ext(in.Path) != ".root" {
					t.Errorf("input %s differs: %+v vs %+v", in.Role, in, rb.Inputs[i])
				}
			}
			// Apart from the size and hash of ROOT inputs, the files are equal.
			if ja, jb := withoutROOTHashes(t, a), withoutROOTHashes(t, b); ja != jb {
				t.Errorf("result.json differs beyond the ROOT inputs' sizes and hashes:\n%s\n---\n%s", ja, jb)
			}
		case name == result.ReportFile:
			// The inputs table holds the sizes and hashes of the ROOT inputs.
			ha, hb := rootSHAHTML.ReplaceAll(a, nil), rootSHAHTML.ReplaceAll(b, nil)
			if len(ha) == 0 || !bytes.Equal(ha, hb) {
				t.Errorf("%s differs between GOMAXPROCS=1 and 2 beyond the ROOT inputs' sizes and hashes", name)
			}
		default:
			if !bytes.Equal(a, b) {
				t.Errorf("%s differs between GOMAXPROCS=1 and 2", name)
			}
		}
	}
}

// withoutROOTHashes returns the JSON document with the byte counts and
// hashes of its ROOT inputs removed, re-encoded.
func withoutROOTHashes(t *testing.T, doc []byte) string {
	t.Helper()
	var m map[string]any
	if err := json.Unmarshal(doc, &m); err != nil {
		t.Fatal(err)
	}
	ins, _ := m["inputs"].([]any)
	for _, in := range ins {
		e := in.(map[string]any)
		if p, _ := e["path"].(string); filepath.Ext(p) == ".root" {
			delete(e, "bytes")
			delete(e, "sha256")
		}
	}
	b, err := json.Marshal(m)
	if err != nil {
		t.Fatal(err)
	}
	return string(b)
}

func sameFloats(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
