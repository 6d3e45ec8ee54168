package main

import (
	"context"
	"encoding/json"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/inputs/tables"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/response"
)

const cliAnalysis = `title: two-dimensional test analysis
binning:
  truth:
    regions:
      - name: central
        axes:
          - {name: y, edges: [0, 1, 2]}
          - {name: pt, edges: [0, 1, 2, 4], overflow: true}
  reco: reco.yaml
observables:
  truth: {y: abs(y_t), pt: pt_t}
  reco: {y: abs(y_r), pt: pt_r}
simulation:
  - file: sim.csv
    weight: w
    truth_selection: pass_t
    reco_selection: pass_r && pt_r > 0.2
data:
  table: n.csv
backgrounds:
  - name: flat
    table: b.csv
    scale: 0.5
    scale_uncertainty: 0.2
unfolding:
  iterations: 3
uncertainty:
  covariance: full
output:
  folder: result
`

const cliReco = `regions:
  - name: central
    axes:
      - {name: y, edges: [0, 0.5, 1, 1.5, 2]}
      - {name: pt, edges: [0, 0.5, 1, 1.5, 2, 3, 4], overflow: true}
`

// writeCLIAnalysis writes a small 2-D analysis: simulated events in
// CSV, the data and a background as plain tables.
func writeCLIAnalysis(t *testing.T) string {
	t.Helper()
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(4, 4))
	const n = 20000
	names := []string{"y_t", "pt_t", "y_r", "pt_r", "w", "pass_t", "pass_r"}
	cols := make([][]float64, len(names))
	for c := range cols {
		cols[c] = make([]float64, n)
	}
	for k := 0; k < n; k++ {
		y, pt := 4*rng.Float64()-2, rng.ExpFloat64()*1.5
		cols[0][k], cols[1][k] = y, pt
		cols[2][k], cols[3][k] = y+0.2*rng.NormFloat64(), pt*(1+0.1*rng.NormFloat64())
		cols[4][k] = 1
		cols[5][k] = boolFloat(rng.Float64() < 0.98)
		cols[6][k] = boolFloat(rng.Float64() < 0.9)
	}
	// The simulation as an events CSV file: a header, then one row per
	// event, each value in the shortest form that reads back exactly.
	var sim []byte
	sim = append(sim, strings.Join(names, ",")+"\n"...)
	for k := 0; k < n; k++ {
		for c := range cols {
			if c > 0 {
				sim = append(sim, ',')
			}
			sim = strconv.AppendFloat(sim, cols[c][k], 'g', -1, 64)
		}
		sim = append(sim, '\n')
	}
	if err := os.WriteFile(filepath.Join(dir, "sim.csv"), sim, 0o644); err != nil {
		t.Fatal(err)
	}
	// 4 × 7 reco bins: 24 in range, then the 4 pt overflows.
	var nb, bb strings.Builder
	nb.WriteString("reco,value\n")
	bb.WriteString("reco,value,variance\n")
	for i := 0; i < 28; i++ {
		nb.WriteString(strconv.Itoa(i) + "," + strconv.Itoa(100+7*i) + "\n")
		bb.WriteString(strconv.Itoa(i) + ",4,1" + "\n")
	}
	for name, content := range map[string]string{"analysis.yaml": cliAnalysis, "reco.yaml": cliReco, "n.csv": nb.String(), "b.csv": bb.String()} {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return filepath.Join(dir, "analysis.yaml")
}

func boolFloat(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// The whole job through the command line: desmear response with
// --tables, then desmear unfold ANALYSIS.yaml, then the plain-table
// desmear unfold on the tables written by the first step, which must
// give the same result bit for bit (the two paths interoperate).
func TestAnalysisEndToEnd(t *testing.T) {
	path := writeCLIAnalysis(t)
	dir := filepath.Dir(path)
	tdir := filepath.Join(dir, "tables")
	code, stdout, stderr := runCLI(t, context.Background(), "response", path, "--tables", tdir)
	if code != 0 {
		t.Fatalf("response: exit %d\n%s", code, stderr)
	}
	// stderr is not a terminal here: no progress bar.
	if strings.Contains(stderr, "%") || strings.Contains(stderr, "events/s") {
		t.Errorf("progress output on a non-terminal stderr: %q", stderr)
	}
	for _, want := range []string{"events read:        20000", "misses:", "fakes:", "outside truth:", "negative cells:     0", "efficiency", "purity", "stability"} {
		if !strings.Contains(stdout, want) {
			t.Errorf("response summary lacks %q:\n%s", want, stdout)
		}
	}
	if _, err := os.Stat(filepath.Join(dir, "response", "response.json")); err != nil {
		t.Errorf("no response bundle: %v", err)
	}
	if code, _, _ := runCLI(t, context.Background(), "response", path); code != exitUsage {
		t.Errorf("an existing bundle was replaced without --force (exit %d)", code)
	}
	// A fine binning does not flood standard output: above --max-bins the
	// per-bin table is left out, and a negative limit is a usage error.
	code, stdout, stderr = runCLI(t, context.Background(), "response", path, "--force", "--max-bins", "1")
	if code != 0 || strings.Contains(stdout, "stability") || !strings.Contains(stdout, "per-bin table left out") {
		t.Errorf("response --max-bins 1: exit %d\n%s%s", code, stdout, stderr)
	}
	if code, _, _ := runCLI(t, context.Background(), "response", path, "--force", "--max-bins", "-1"); code != exitUsage {
		t.Errorf("response --max-bins -1: exit %d, want %d", code, exitUsage)
	}

	code, stdout, stderr = runCLI(t, context.Background(), "unfold", path)
	if code != 0 {
		t.Fatalf("unfold analysis: exit %d\n%s", code, stderr)
	}
	if !strings.Contains(stdout, "result: "+filepath.Join(dir, "result")) || !strings.Contains(stdout, "iterations: 3") {
		t.Errorf("unfold output:\n%s", stdout)
	}
	for _, f := range []string{"result.json", "result.csv", "region-central.csv", "result.root"} {
		if _, err := os.Stat(filepath.Join(dir, "result", f)); err != nil {
			t.Errorf("result folder lacks %s", f)
		}
	}

	plain := filepath.Join(dir, "plain")
	code, _, stderr = runCLI(t, context.Background(), "unfold", "--response", filepath.Join(tdir, "response.csv"), "--generated", filepath.Join(tdir, "generated.csv"),
		"--background", filepath.Join(tdir, "background.csv"), "--data", filepath.Join(dir, "n.csv"),
		"--iterations", "3", "--covariance", "full", "--out", plain)
	if code != 0 {
		t.Fatalf("plain unfold: exit %d\n%s", code, stderr)
	}
	// The tables carry statistical variances only: the background's scale
	// uncertainty is a correlated source of the analysis (method.md §21),
	// so the plain-table uncertainty equals the analysis's data source.
	a, b := readAnalysisResult(t, filepath.Join(dir, "result")), readAnalysisResult(t, plain)
	var data []float64
	for _, s := range a.Sources {
		if s.Name == "data" {
			data = s.Uncertainty
		}
	}
	if !slices.Equal(a.Estimate, b.Estimate) || !slices.Equal(data, b.Uncertainty) || len(a.Estimate) != 8 {
		t.Errorf("analysis %v ± %v (data)\nplain    %v ± %v", a.Estimate, data, b.Estimate, b.Uncertainty)
	}
	if len(a.Sources) != 2 || a.Sources[1].Name == "data" {
		t.Errorf("analysis sources %+v, want data and the background's scale", a.Sources)
	}

	// The background table holds the fakes plus 0.5 × b.csv, with
	// variance sumw2(fakes) + 0.25 × 1 + (0.2 × 0.5 × 4)².
	bg, err := tables.LoadVector(filepath.Join(tdir, "background.csv"), tables.Background)
	if err != nil {
		t.Fatal(err)
	}
	if len(bg.Value) != 28 || bg.Value[0] < 2 || bg.Err2[0] < 0.25+0.16 {
		t.Errorf("background table %v %v", bg.Value, bg.Err2)
	}
}

type analysisResultJSON struct {
	Estimate    []float64 `json:"estimate"`
	Uncertainty []float64 `json:"uncertainty"`
	Sources     []struct {
		Name        string    `json:"name"`
		Uncertainty []float64 `json:"uncertainty"`
	} `json:"sources"`
}

func readAnalysisResult(t *testing.T, dir string) analysisResultJSON {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(dir, "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	var r analysisResultJSON
	if err := json.Unmarshal(b, &r); err != nil {
		t.Fatal(err)
	}
	return r
}

func TestAnalysisErrors(t *testing.T) {
	path := writeCLIAnalysis(t)
	src, _ := os.ReadFile(path)
	nbad := 0
	bad := func(old, new string) string {
		nbad++
		p := filepath.Join(filepath.Dir(path), "bad"+strconv.Itoa(nbad)+".yaml")
		os.WriteFile(p, []byte(strings.Replace(string(src), old, new, 1)), 0o644)
		return p
	}
	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"unfold", bad("  iterations: 3", "  iterations: 3\n  iteratoins: 4")}, exitInput, "bad1.yaml:27: iteratoins: unknown key in unfolding"},
		{[]string{"response", bad("weight: w", "weight: wgt")}, exitInput, `bad2.yaml:15: simulation[0].weight: unknown column "wgt"`},
		{[]string{"response", bad("file: sim.csv", "file: nowhere.csv")}, exitInput, "bad3.yaml:14: simulation[0].file: cannot open the events file"},
		{[]string{"unfold", filepath.Join(filepath.Dir(path), "missing.yaml")}, exitInput, "missing.yaml: cannot read the analysis file"},
		// The library says what to do; the command line adds the command.
		{[]string{"unfold", bad("simulation:", "response: unbuilt\nsimulation:")}, exitInput,
			`response: the saved response ` + filepath.Join(filepath.Dir(path), "unbuilt") + ` does not exist yet; build it from the simulation with "desmear response ` + filepath.Join(filepath.Dir(path), "bad4.yaml") + `"`},
	}
	for _, c := range cases {
		code, _, stderr := runCLI(t, context.Background(), c.args...)
		if code != c.code || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want exit %d and %q", c.args, code, stderr, c.code, c.want)
		}
		if _, err := os.Stat(filepath.Join(filepath.Dir(path), "result")); err == nil {
			t.Errorf("%v: a result folder was left behind", c.args)
		}
	}
}

// An existing result folder is refused without --force with a hint to
// use it; a folder that is not an earlier result is refused even with
// --force, and the message does not suggest --force.
func TestAnalysisOutputFolderRefused(t *testing.T) {
	path := writeCLIAnalysis(t)
	res := filepath.Join(filepath.Dir(path), "result")
	if err := os.Mkdir(res, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(res, "thesis.tex"), []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI(t, context.Background(), "unfold", path)
	if code != exitUsage || !strings.Contains(stderr, "use --force") {
		t.Errorf("without --force: exit %d, %q; want %d and a hint to use --force", code, stderr, exitUsage)
	}
	code, _, stderr = runCLI(t, context.Background(), "unfold", path, "--force")
	if code != exitUsage || strings.Contains(stderr, "use --force") || !strings.Contains(stderr, "not replaced even with --force") {
		t.Errorf("with --force: exit %d, %q; want %d and no hint to use --force", code, stderr, exitUsage)
	}
	if b, err := os.ReadFile(filepath.Join(res, "thesis.tex")); err != nil || string(b) != "keep" {
		t.Errorf("the folder was touched: %v %q", err, b)
	}
}

// The per-bin table of an analysis is printed for up to 30 in-range truth
// bins, as in plain-table mode; beyond that the output names the file
// that holds the estimates instead of printing every bin.
func TestPrintOutcomeLimitsTable(t *testing.T) {
	for _, c := range []struct {
		bins  int
		files []string
		want  string
	}{
		{30, []string{"result.json", "result.csv"}, "   29  "},
		{31, []string{"result.json", "result.csv"}, "31 in-range truth bins: the estimates are in " + filepath.Join("out", "result.csv")},
		{31, []string{"result.json"}, "31 in-range truth bins: the estimates are in " + filepath.Join("out", "result.json")},
	} {
		edges := make([]float64, c.bins+1)
		for i := range edges {
			edges[i] = float64(i)
		}
		ax, err := binning.NewAxis("x", "", edges, false, false)
		if err != nil {
			t.Fatal(err)
		}
		reg, err := binning.NewRegion("all", ax)
		if err != nil {
			t.Fatal(err)
		}
		s, err := binning.NewScheme(reg)
		if err != nil {
			t.Fatal(err)
		}
		res := &unfold.Result{
			Estimate:   make([]float64, c.bins),
			Determined: make([]bool, c.bins),
			Efficiency: make([]float64, c.bins),
			Details:    &bayes.Details{Iterations: 4},
		}
		var b strings.Builder
		printOutcome(&b, &analysis.Analysis{Truth: s}, &analysis.Outcome{Result: res, Folder: "out", Files: c.files})
		got := b.String()
		if !strings.Contains(got, c.want) {
			t.Errorf("%d bins, files %v: output lacks %q:\n%s", c.bins, c.files, c.want, got)
		}
		if lines := strings.Count(got, "\n"); c.bins > 30 && lines != 3 {
			t.Errorf("%d bins: %d lines printed, want 3:\n%s", c.bins, lines, got)
		}
	}
}

// desmear response never replaces a folder that is not its own earlier
// output, even with --force: the bundle folder must hold a response.json
// and the tables folder a response.csv. Both are refused before any
// event is read, and the folders are left as they were.
func TestResponseTargetRefused(t *testing.T) {
	path := writeCLIAnalysis(t)
	foreign := filepath.Join(filepath.Dir(path), "mine")
	if err := os.Mkdir(foreign, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(foreign, "thesis.tex"), []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"response", path, "--out", foreign}, "exists (use --force"},
		{[]string{"response", path, "--out", foreign, "--force"}, "does not hold a response.json"},
		{[]string{"response", path, "--tables", foreign, "--force"}, "does not hold a response.csv"},
	} {
		code, stdout, stderr := runCLI(t, context.Background(), c.args...)
		if code != exitUsage || !strings.Contains(stderr, c.want) || stdout != "" {
			t.Errorf("%v: exit %d, stdout %q, stderr %q; want %d and %q", c.args[2:], code, stdout, stderr, exitUsage, c.want)
		}
	}
	if names, _ := os.ReadDir(foreign); len(names) != 1 {
		t.Errorf("the folder was touched: %v", names)
	}
	if _, err := os.Stat(filepath.Join(filepath.Dir(path), "response")); err == nil {
		t.Error("a response bundle was written although the tables folder was refused")
	}
}

// A folder that appears at the tables path while the response is built
// (after the first check) is not replaced either: writeTables checks
// again before renaming, and leaves no temporary folder behind.
func TestWriteTablesChecksAgain(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "tables")
	if err := os.Mkdir(dir, 0o755); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "thesis.tex"), []byte("keep"), 0o644); err != nil {
		t.Fatal(err)
	}
	m, err := sparse.NewMatrix(1, 1, []int{0, 1}, []int{0}, []float64{2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	r := &response.Built{Migrations: m, Generated: []float64{3}, GeneratedSumW2: []float64{3}, Fakes: []float64{0}, FakesSumW2: []float64{0}}
	err = writeTables(dir, r, nil, true)
	if err == nil || !strings.Contains(err.Error(), "without a response.csv") {
		t.Errorf("writeTables over a foreign folder: %v", err)
	}
	if names, _ := os.ReadDir(parent); len(names) != 1 {
		t.Errorf("beside the folder: %v", names)
	}
	if b, err := os.ReadFile(filepath.Join(dir, "thesis.tex")); err != nil || string(b) != "keep" {
		t.Errorf("the folder was touched: %v %q", err, b)
	}
}

// The bootstrap of the simulated events through the command line: the
// notes on stderr name the replicas and their passes over the events
// (method.md §25 Bootstrap replicas of the simulated events).
func TestAnalysisReplicasNotes(t *testing.T) {
	path := writeCLIAnalysis(t)
	src, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(src), "  covariance: full\n", "  covariance: full\n  replicas: 20\n", 1)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr := runCLI(t, context.Background(), "unfold", path)
	if code != 0 {
		t.Fatalf("unfold: exit %d\n%s", code, stderr)
	}
	if want := "note: the bootstrap filled its 20 replicas in 1 pass(es)"; !strings.Contains(stderr, want) {
		t.Errorf("stderr lacks %q:\n%s", want, stderr)
	}
	b, err := os.ReadFile(filepath.Join(filepath.Dir(path), "result", "result.json"))
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(b), `"bootstrap-replicas"`) {
		t.Error("result.json names no bootstrap-replicas source")
	}
}
