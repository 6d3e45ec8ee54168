package main

import (
	"bytes"
	"context"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/inputs"
	"github.com/desmear/desmear/unfold/result"
)

// runCLI runs the command line in-process and returns its exit status,
// stdout and stderr.
func runCLI(t testing.TB, ctx context.Context, args ...string) (int, string, string) {
	t.Helper()
	var stdout, stderr bytes.Buffer
	code := run(ctx, args, strings.NewReader(""), &stdout, &stderr)
	return code, stdout.String(), stderr.String()
}

// writeFiles writes name → content into dir and returns dir.
func writeFiles(t *testing.T, dir string, files map[string]string) string {
	t.Helper()
	for name, content := range files {
		if err := os.WriteFile(filepath.Join(dir, name), []byte(content), 0o666); err != nil {
			t.Fatal(err)
		}
	}
	return dir
}

// Oracle D of method.md §10 Reference values used by the tests: 3 truth
// × 4 reco bins, R (rows reco) = [[0.60,0.10,0.00],[0.20,0.60,0.10],
// [0.05,0.15,0.60],[0.00,0.05,0.20]], n = (667,578,325,87), flat prior.
// With G = (1000,1000,1000) the response table is A = 1000 R. The
// iteration is D'Agostini's (NIM A 362 (1995) 487; CERN Yellow Report
// 99-03, eqs. 7.3-7.5); the expected values come from an independent
// computation of that iteration (not this project's code; method.md §10).
var oracleD = map[string]string{
	"A.csv": `# Oracle D: A = R * 1000
reco,truth,value
0,0,600
0,1,100
1,0,200
1,1,600
1,2,100
2,0,50
2,1,150
2,2,600
3,1,50
3,2,200
`,
	"G.csv": "truth,value\n0,1000\n1,1000\n2,1000\n",
	"n.csv": "reco,value\n0,667\n1,578\n2,325\n3,87\n",
	"p.csv": "# flat prior\ntruth,value\n0,1\n1,1\n2,1\n",
}

func oracleDArgs(dir, out string) []string {
	return []string{"unfold",
		"--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
		"--data", filepath.Join(dir, "n.csv"), "--prior", filepath.Join(dir, "p.csv"),
		"--out", out}
}

func readResult(t *testing.T, dir string) (*result.Result, map[string]any) {
	t.Helper()
	data, err := os.ReadFile(filepath.Join(dir, result.JSONFile))
	if err != nil {
		t.Fatal(err)
	}
	var r result.Result
	if err := json.Unmarshal(data, &r); err != nil {
		t.Fatal(err)
	}
	var raw map[string]any
	json.Unmarshal(data, &raw)
	return &r, raw
}

func readCSV(t *testing.T, path string) [][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	return recs
}

func TestUnfoldOracleD(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(t.TempDir(), "result")
	code, stdout, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--iterations", "5")...)
	if code != exitOK {
		t.Fatalf("exit %d\nstderr: %s", code, stderr)
	}
	r, raw := readResult(t, out)
	// method.md §10, Oracle D: iteration 5.
	want := []float64{1006.166641, 581.767988, 309.074630}
	for j, w := range want {
		if math.Abs(r.Estimate[j]-w) > 1e-6 {
			t.Errorf("estimate[%d] = %.7f, want %.6f (Oracle D)", j, r.Estimate[j], w)
		}
	}
	// Oracle D: Σ eps_j μ_j = Σ n_i = 1657 at every step; eps = (0.85, 0.90, 0.90).
	eps := []float64{0.85, 0.90, 0.90}
	var s float64
	for j := range eps {
		s += eps[j] * r.Estimate[j]
		if math.Abs(r.Efficiency[j]-eps[j]) > 1e-12 {
			t.Errorf("efficiency[%d] = %v, want %v", j, r.Efficiency[j], eps[j])
		}
	}
	if math.Abs(s-1657) > 1e-8 {
		t.Errorf("Σ eps μ = %v, want 1657 (Oracle D)", s)
	}
	if r.Iterations != 5 || len(r.History) != 6 || r.Converged || r.StoppedBy != "iterations" {
		t.Errorf("iterations %d, history %d steps, converged %v, stopped by %q", r.Iterations, len(r.History), r.Converged, r.StoppedBy)
	}
	// Oracle D: the log-likelihood increases, 8607.7217 after iteration 1 to
	// 8624.3521 (Dempster, Laird, Rubin, JRSS B 39 (1977) 1: EM never
	// decreases the likelihood).
	if math.Abs(r.History[1].LogLikelihood-8607.7217) > 1e-3 {
		t.Errorf("log-likelihood after iteration 1 = %.4f, want 8607.7217 (Oracle D)", r.History[1].LogLikelihood)
	}
	for k := 2; k < len(r.History); k++ {
		if r.History[k].LogLikelihood < r.History[k-1].LogLikelihood {
			t.Errorf("log-likelihood decreases at iteration %d", k)
		}
	}
	if r.Format != result.Format || r.Program.Version != version || r.Settings.Iterations != 5 || r.Settings.Prior != "table" || r.Settings.Covariance != "diag" {
		t.Errorf("header fields: %+v %+v %+v", r.Format, r.Program, r.Settings)
	}
	if len(r.Uncertainty) != 3 || r.Covariance != nil || raw["covariance"] != nil {
		t.Errorf("uncertainty %v; covariance %v (want none without --covariance full)", r.Uncertainty, r.Covariance)
	}
	if !slices.Equal(r.Determined, []bool{true, true, true}) {
		t.Errorf("determined = %v", r.Determined)
	}
	// Inputs with their SHA-256, computed here independently with os.ReadFile.
	roles := map[string]string{"response": "A.csv", "generated": "G.csv", "data": "n.csv", "prior": "p.csv"}
	if len(r.Inputs) != len(roles) {
		t.Errorf("%d inputs recorded, want %d", len(r.Inputs), len(roles))
	}
	for _, in := range r.Inputs {
		want, err := inputs.Hash(in.Role, filepath.Join(dir, roles[in.Role]))
		if err != nil || in != want {
			t.Errorf("input %+v, want %+v (%v)", in, want, err)
		}
	}

	recs := readCSV(t, filepath.Join(out, result.CSVFile))
	if got := strings.Join(recs[0], ","); got != "index,estimate,uncertainty,determined,efficiency" {
		t.Errorf("result.csv header %q", got)
	}
	if len(recs) != 4 {
		t.Fatalf("result.csv has %d rows, want 1 + 3", len(recs))
	}
	for j := range want {
		v, err := strconv.ParseFloat(recs[j+1][1], 64)
		if err != nil || v != r.Estimate[j] || recs[j+1][0] != strconv.Itoa(j) {
			t.Errorf("result.csv row %d = %v, want estimate %v", j, recs[j+1], r.Estimate[j])
		}
	}
	if !strings.Contains(stdout, "in 5 iterations") || !strings.Contains(stdout, "1006.17") {
		t.Errorf("stdout lacks the summary:\n%s", stdout)
	}
	if entries := dirNames(t, filepath.Dir(out)); !slices.Equal(entries, []string{"result"}) {
		t.Errorf("beside the result: %v", entries)
	}
}

// Oracle E of method.md §10: R = [[0.7,0.2,0],[0.2,0.6,0.2],[0,0.15,0.7]],
// n = (820,900,640), flat prior, Poisson data; after 2 iterations
// sqrt(diag V) = (31.746167, 25.974453, 29.433933) and corr(0,1) =
// 0.196891 from the linearised propagation through every iteration
// (T. Adye, PHYSTAT 2011, CERN-2011-006, arXiv:1105.1160; method.md §8
// Linearised uncertainty propagation; values from an independent
// computation, method.md §10). The stop rule's maximum is exercised too.
func TestUnfoldOracleEFullCovariance(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), map[string]string{
		"A.csv": "reco,truth,value\n0,0,700\n0,1,200\n1,0,200\n1,1,600\n1,2,200\n2,1,150\n2,2,700\n",
		"G.csv": "truth,value\n0,1000\n1,1000\n2,1000\n",
		"n.csv": "reco,value\n0,820\n1,900\n2,640\n",
		"p.csv": "truth,value\n0,5\n1,5\n2,5\n",
	})
	out := filepath.Join(t.TempDir(), "result")
	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--stop-chi2", "1e-300", "--max-iterations", "2", "--covariance", "full")...)
	if code != exitOK {
		t.Fatalf("exit %d\nstderr: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	if r.Iterations != 2 || r.Converged || r.StoppedBy != "max_iterations" || r.Settings.MaxIterations != 2 {
		t.Errorf("iterations %d converged %v stopped by %q settings %+v", r.Iterations, r.Converged, r.StoppedBy, r.Settings)
	}
	wantMu := []float64{923.565227, 894.044441, 754.943419}
	wantSigma := []float64{31.746167, 25.974453, 29.433933}
	for j := range wantMu {
		if math.Abs(r.Estimate[j]-wantMu[j]) > 1e-6 || math.Abs(r.Uncertainty[j]-wantSigma[j]) > 1e-6 {
			t.Errorf("bin %d: %.6f ± %.6f, want %.6f ± %.6f (Oracle E, K = 2)", j, r.Estimate[j], r.Uncertainty[j], wantMu[j], wantSigma[j])
		}
		if math.Abs(math.Sqrt(r.Covariance[j][j])-r.Uncertainty[j]) > 1e-9 {
			t.Errorf("uncertainty[%d] is not the root of the covariance diagonal", j)
		}
	}
	if rho := r.Covariance[0][1] / (r.Uncertainty[0] * r.Uncertainty[1]); math.Abs(rho-0.196891) > 1e-6 {
		t.Errorf("corr(0,1) = %.6f, want 0.196891 (Oracle E, K = 2)", rho)
	}
	if r.Covariance[0][1] != r.Covariance[1][0] {
		t.Error("covariance not symmetric")
	}
}

const truthYAML = `regions:
  - name: all
    axes:
      - {name: x, unit: GeV, edges: [0, 1, 2, 3], overflow: true}
`

const recoYAML = `regions:
  - name: all
    axes:
      - {name: x, unit: GeV, edges: [0, 0.75, 1.5, 2.25, 3]}
`

// With binning files the sizes come from the schemes (the truth overflow
// bin 3 has no response entries and is not determined), and result.csv
// carries the edges.
func TestUnfoldWithBinning(t *testing.T) {
	files := maps(oracleD, map[string]string{"T.yaml": truthYAML, "R.yaml": recoYAML})
	delete(files, "p.csv")
	dir := writeFiles(t, t.TempDir(), files)
	out := filepath.Join(t.TempDir(), "result")
	args := []string{"unfold", "--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
		"--data", filepath.Join(dir, "n.csv"), "--truth-binning", filepath.Join(dir, "T.yaml"), "--reco-binning", filepath.Join(dir, "R.yaml"),
		"--covariance", "none", "--iterations", "3", "--smooth", "0.5", "--out", out}
	code, stdout, stderr := runCLI(t, context.Background(), args...)
	if code != exitOK {
		t.Fatalf("exit %d\nstderr: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	if r.TruthBins != 4 || r.Determined[3] || r.Estimate[3] != 0 || r.Uncertainty != nil {
		t.Errorf("truth bins %d, determined %v, estimate %v, uncertainty %v", r.TruthBins, r.Determined, r.Estimate, r.Uncertainty)
	}
	if r.TruthBinning == nil || r.RecoBinning == nil || r.TruthBinning.Labels[3] != "all x[3,inf)" || !r.TruthBinning.Flow[3] {
		t.Errorf("binning descriptions: %+v", r.TruthBinning)
	}
	if r.Settings.Smoothing != 0.5 {
		t.Errorf("smoothing %v not recorded", r.Settings.Smoothing)
	}
	recs := readCSV(t, filepath.Join(out, result.CSVFile))
	if got := strings.Join(recs[0], ","); got != "index,region,flow,x_low,x_high,estimate,determined,efficiency" {
		t.Errorf("result.csv header %q", got)
	}
	if got := strings.Join(recs[4], ","); got != "3,all,true,3,inf,0,false,0" {
		t.Errorf("result.csv overflow row %q", got)
	}
	if !strings.Contains(stdout, "(not determined)") || !strings.Contains(stderr, "not determined") {
		t.Errorf("the undetermined bin is not reported:\n%s\n%s", stdout, stderr)
	}
}

// A prior with a zero in a measurable bin is reported: EM keeps zeros
// (the update multiplies the previous estimate), so that bin stays 0
// ("if the probability of a cause is initially set to zero it can never
// change": D'Agostini, CERN Yellow Report 99-03, ch. 7).
func TestUnfoldZeroPriorNote(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), maps(oracleD, map[string]string{"p.csv": "truth,value\n0,1\n2,1\n"}))
	out := filepath.Join(t.TempDir(), "result")
	code, _, stderr := runCLI(t, context.Background(), oracleDArgs(dir, out)...)
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	if r.Estimate[1] != 0 || !strings.Contains(stderr, "is 0 in 1 truth bins") {
		t.Errorf("estimate %v; the zero prior is not reported:\n%s", r.Estimate, stderr)
	}
}

func maps(ms ...map[string]string) map[string]string {
	out := map[string]string{}
	for _, m := range ms {
		for k, v := range m {
			out[k] = v
		}
	}
	return out
}

func dirNames(t *testing.T, dir string) []string {
	t.Helper()
	es, err := os.ReadDir(dir)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range es {
		names = append(names, e.Name())
	}
	return names
}

// Every class of bad input: the right exit status, one message naming
// the file, line and field, no stack trace, and nothing written.
func TestUnfoldBadInput(t *testing.T) {
	cases := []struct {
		name  string
		edit  map[string]string // files replaced in the Oracle D set
		extra []string          // extra arguments
		code  int
		frags []string
	}{
		{"malformed row", map[string]string{"A.csv": "reco,truth,value\n0,0,600\n0,1\n"}, nil, exitInput, []string{"A.csv:3:", "2 fields"}},
		{"non-numeric", map[string]string{"n.csv": "reco,value\n0,667\n1,abc\n"}, nil, exitInput, []string{"n.csv:3:", `field "value"`, `"abc" is not a number`}},
		{"NaN", map[string]string{"G.csv": "truth,value\n0,1000\n1,NaN\n2,1000\n"}, nil, exitInput, []string{"G.csv:3:", `field "value"`, "NaN"}},
		{"Inf", map[string]string{"b.csv": "reco,value\n0,inf\n"}, []string{"--background", "b.csv"}, exitInput, []string{"b.csv:2:", `field "value"`, "infinite"}},
		{"negative count", map[string]string{"A.csv": "reco,truth,value\n0,0,600\n1,1,-3\n"}, nil, exitInput, []string{"A.csv:3:", `field "value"`, "negative"}},
		{"negative variance", map[string]string{"n.csv": "reco,value,variance\n0,667,-1\n"}, nil, exitInput, []string{"n.csv:2:", `field "variance"`, "negative"}},
		{"negative index", map[string]string{"n.csv": "reco,value\n-1,667\n"}, nil, exitInput, []string{"n.csv:2:", `field "reco"`, "negative"}},
		{"index beyond binning", map[string]string{"R.yaml": recoYAML, "n.csv": "reco,value\n0,667\n7,3\n"}, []string{"--reco-binning", "R.yaml"}, exitInput, []string{"n.csv:3:", `field "reco"`, "index 7 is beyond the 4 reco bins of the reco binning"}},
		{"duplicate row", map[string]string{"G.csv": "truth,value\n0,1000\n1,1000\n2,1000\n1,1000\n"}, nil, exitInput, []string{"G.csv:5:", `field "truth"`, "given twice", "line 3"}},
		{"no generated count", map[string]string{"G.csv": "truth,value\n0,1000\n1,1000\n"}, nil, exitInput, []string{"A.csv:7:", `field "truth"`, "truth bin 2 has response entries", "no generated count"}},
		{"efficiency above 1", map[string]string{"G.csv": "truth,value\n0,1000\n1,1000\n2,800\n"}, nil, exitInput, []string{"G.csv:4:", "efficiency 1.125"}},
		{"empty response", map[string]string{"A.csv": "# nothing yet\nreco,truth,value\n"}, nil, exitInput, []string{"A.csv:", "response is empty"}},
		{"unknown column", map[string]string{"A.csv": "reco,truth,value,sumW\n"}, nil, exitInput, []string{"A.csv:1:", `field "sumw"`, "unknown column"}},
		{"data no bin can explain", map[string]string{"n.csv": "reco,value\n0,667\n1,578\n2,325\n3,87\n5,4\n"}, nil, exitInput, []string{"n.csv:6:", "reco bin 5"}},
		{"bad binning file", map[string]string{"T.yaml": "regions: [{name: a, axes: [{name: x, edges: [2, 1]}]}]\n"}, []string{"--truth-binning", "T.yaml"}, exitInput, []string{"T.yaml:1"}},
		{"missing file", nil, []string{"--background", "nothere.csv"}, exitInput, []string{"nothere.csv does not exist"}},
		{"unknown flag value", nil, []string{"--covariance", "bogus"}, exitUsage, []string{`"bogus"`, "none, diag, full"}},
		{"unknown background mode", nil, []string{"--background-mode", "both"}, exitUsage, []string{`"both"`}},
		{"bad memory limit", nil, []string{"--memory-limit", "lots"}, exitUsage, []string{"not a positive size"}},
		{"unknown flag", nil, []string{"--iteratoins", "3"}, exitUsage, []string{"unknown flag"}},
		{"iterations and stop", nil, []string{"--iterations", "3", "--stop-chi2", "1"}, exitUsage, []string{"either --iterations or --stop-chi2"}},
		{"max without stop", nil, []string{"--max-iterations", "3"}, exitUsage, []string{"only with --stop-chi2"}},
		{"probes with full", nil, []string{"--covariance", "full", "--probes", "10"}, exitUsage, []string{"--probes applies only"}},
		{"smooth without binning", nil, []string{"--smooth", "0.5"}, exitUsage, []string{"--smooth needs --truth-binning"}},
		{"negative iterations", nil, []string{"--iterations", "-1"}, exitUsage, []string{"--iterations -1: must be ≥ 1"}},
		{"zero iterations", nil, []string{"--iterations", "0"}, exitUsage, []string{"give at least 1 iteration"}},
		{"negative stop", nil, []string{"--stop-chi2", "-1"}, exitUsage, []string{"--stop-chi2 -1: must be a finite number > 0"}},
		{"NaN stop", nil, []string{"--stop-chi2", "NaN"}, exitUsage, []string{"--stop-chi2 NaN: must be a finite number > 0"}},
		{"zero stop", nil, []string{"--stop-chi2", "0"}, exitUsage, []string{"give a threshold > 0"}},
		{"zero max", nil, []string{"--stop-chi2", "1", "--max-iterations", "0"}, exitUsage, []string{"--max-iterations 0: give a positive number"}},
		{"smooth out of range", nil, []string{"--smooth", "2", "--truth-binning", "T.yaml"}, exitUsage, []string{"--smooth 2: must be a strength in (0, 1]"}},
		{"background mode without background", nil, []string{"--background-mode", "subtract"}, exitUsage, []string{"--background-mode needs --background"}},
		{"diagonal method with full", nil, []string{"--covariance", "full", "--diagonal-method", "exact"}, exitUsage, []string{"--diagonal-method applies only"}},
		{"one probe", nil, []string{"--probes", "1"}, exitUsage, []string{"--probes 1: must be at least 2"}},
		{"toys without toys method", nil, []string{"--toys", "10"}, exitUsage, []string{"--toys applies only"}},
		{"one toy", nil, []string{"--diagonal-method", "toys", "--toys", "1"}, exitUsage, []string{"--toys 1: must be at least 2"}},
		{"response samples without sumw2", nil, []string{"--response-samples", "20"}, exitInput, []string{"G.csv:", `field "sumw2"`, "no sumw2 column", "cannot be sampled"}},
		{"one response sample", nil, []string{"--response-samples", "1"}, exitUsage, []string{"--response-samples 1: must be 0 (no sampling) or at least 2"}},
		{"negative response samples", nil, []string{"--response-samples", "-2"}, exitUsage, []string{"--response-samples -2: must be 0"}},
		{"response samples without covariance", nil, []string{"--response-samples", "20", "--covariance", "none"}, exitUsage, []string{"--response-samples 20: needs an uncertainty of the data too"}},
		{"unknown sampling prior", nil, []string{"--sampling-prior", "uniform"}, exitUsage, []string{`"uniform"`, "none, flat"}},
		{"sampling prior without sampling", nil, []string{"--sampling-prior", "flat"}, exitUsage, []string{"--sampling-prior applies only"}},
		{"zero sumw2", map[string]string{"G.csv": "truth,value,sumw2\n0,1000,1000\n1,1000,0\n2,1000,1000\n"}, []string{"--response-samples", "20"}, exitInput, []string{"G.csv:3:", `field "sumw2"`, "truth bin 1"}},
		{"covariance too large", nil, []string{"--covariance", "full", "--memory-limit", "10B"}, exitNumerical, []string{"memory limit", "--covariance diag"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := writeFiles(t, t.TempDir(), maps(oracleD, c.edit))
			parent := t.TempDir()
			out := filepath.Join(parent, "result")
			args := oracleDArgs(dir, out)
			for _, a := range c.extra {
				if strings.HasSuffix(a, ".csv") || strings.HasSuffix(a, ".yaml") {
					a = filepath.Join(dir, a)
				}
				args = append(args, a)
			}
			code, stdout, stderr := runCLI(t, context.Background(), args...)
			if code != c.code {
				t.Errorf("exit %d, want %d\nstderr: %s", code, c.code, stderr)
			}
			for _, f := range c.frags {
				if !strings.Contains(stderr, f) {
					t.Errorf("stderr does not mention %q:\n%s", f, stderr)
				}
			}
			if strings.Count(stderr, "desmear: ") != 1 || strings.Contains(stderr, "goroutine") || strings.Contains(stderr, ".go:") {
				t.Errorf("want one message without a stack trace, got:\n%s", stderr)
			}
			if stdout != "" {
				t.Errorf("stdout not empty on error: %q", stdout)
			}
			if names := dirNames(t, parent); len(names) != 0 {
				t.Errorf("left behind: %v", names)
			}
		})
	}
}

func TestUnfoldExistingFolder(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	parent := t.TempDir()
	out := filepath.Join(parent, "result")
	if code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--iterations", "1")...); code != exitOK {
		t.Fatalf("first run: exit %d: %s", code, stderr)
	}
	first, _ := os.ReadFile(filepath.Join(out, result.JSONFile))

	code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--iterations", "5")...)
	if code != exitUsage || !strings.Contains(stderr, "exists") || !strings.Contains(stderr, "--force") {
		t.Errorf("second run without --force: exit %d, stderr %q", code, stderr)
	}
	if again, _ := os.ReadFile(filepath.Join(out, result.JSONFile)); !bytes.Equal(again, first) {
		t.Error("the refused run changed the existing result")
	}

	code, _, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--iterations", "5", "--force")...)
	if code != exitOK {
		t.Fatalf("run with --force: exit %d: %s", code, stderr)
	}
	if r, _ := readResult(t, out); r.Iterations != 5 {
		t.Errorf("after --force the result has %d iterations, want 5", r.Iterations)
	}
	if names := dirNames(t, parent); !slices.Equal(names, []string{"result"}) {
		t.Errorf("beside the result: %v", names)
	}

	// A folder that is not a result is never replaced.
	foreign := filepath.Join(parent, "mine")
	os.Mkdir(foreign, 0o777)
	os.WriteFile(filepath.Join(foreign, "thesis.tex"), []byte("x"), 0o666)
	code, _, stderr = runCLI(t, context.Background(), append(oracleDArgs(dir, foreign), "--force")...)
	if code != exitUsage || !strings.Contains(stderr, "not an earlier result folder") {
		t.Errorf("--force on a foreign folder: exit %d, stderr %q", code, stderr)
	}
	if names := dirNames(t, foreign); !slices.Equal(names, []string{"thesis.tex"}) {
		t.Errorf("foreign folder now holds %v", names)
	}
}

// An interrupt (a cancelled context, as SIGINT gives through
// signal.NotifyContext) at any stage leaves nothing behind and exits 130.
func TestUnfoldInterrupted(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	for _, stage := range []string{"start", "loaded", "unfolded", "written"} {
		t.Run(stage, func(t *testing.T) {
			parent := t.TempDir()
			out := filepath.Join(parent, "result")
			ctx, cancel := context.WithCancel(context.Background())
			defer cancel()
			if stage == "start" {
				cancel()
			}
			testHook = func(_ context.Context, s string) {
				if s == stage {
					cancel()
				}
			}
			defer func() { testHook = nil }()
			code, stdout, stderr := runCLI(t, ctx, oracleDArgs(dir, out)...)
			if code != exitInterrupted || !strings.Contains(stderr, "interrupted") {
				t.Errorf("exit %d, stderr %q; want %d", code, stderr, exitInterrupted)
			}
			if stdout != "" {
				t.Errorf("stdout %q", stdout)
			}
			if names := dirNames(t, parent); len(names) != 0 {
				t.Errorf("left behind: %v", names)
			}
		})
	}
}

// A panic is a bug: exit 70 with a request to report it.
func TestUnfoldPanic(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	parent := t.TempDir()
	testHook = func(_ context.Context, s string) {
		if s == "written" {
			panic("injected failure")
		}
	}
	defer func() { testHook = nil }()
	code, _, stderr := runCLI(t, context.Background(), oracleDArgs(dir, filepath.Join(parent, "result"))...)
	if code != exitBug || !strings.Contains(stderr, "injected failure") || !strings.Contains(stderr, "report") {
		t.Errorf("exit %d, stderr:\n%s", code, stderr)
	}
	if names := dirNames(t, parent); len(names) != 0 {
		t.Errorf("a panic left behind: %v", names)
	}
}

func TestUnfoldArguments(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	out := filepath.Join(t.TempDir(), "result")
	for _, c := range []struct {
		name  string
		args  []string
		frags []string
	}{
		{"mixed", []string{"unfold", "analysis.yaml", "--response", filepath.Join(dir, "A.csv")}, []string{"not both", "--response"}},
		{"settings with analysis file", []string{"unfold", "analysis.yaml", "--iterations", "3", "--force"}, []string{"--iterations cannot be combined with an analysis file"}},
		{"two files", []string{"unfold", "a.yaml", "b.yaml"}, []string{"accepts at most 1 arg"}},
		// A table given where the analysis file goes is pointed to the flags.
		{"table as analysis file", []string{"unfold", filepath.Join(dir, "A.csv")}, []string{"looks like a plain table", "--response A.csv"}},
		{"missing required", []string{"unfold", "--response", filepath.Join(dir, "A.csv"), "--out", out}, []string{"--generated", "--data"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			code, _, stderr := runCLI(t, context.Background(), c.args...)
			if code != exitUsage {
				t.Errorf("exit %d, want %d: %s", code, exitUsage, stderr)
			}
			for _, f := range c.frags {
				if !strings.Contains(stderr, f) {
					t.Errorf("stderr %q lacks %q", stderr, f)
				}
			}
		})
	}
}

func TestRootHelpListsExitCodes(t *testing.T) {
	code, stdout, _ := runCLI(t, context.Background(), "--help")
	if code != exitOK {
		t.Fatalf("exit %d", code)
	}
	for _, c := range []int{exitUsage, exitInput, exitNumerical, exitIO, exitBug, exitInterrupted} {
		if !strings.Contains(stdout, "\n  "+strconv.Itoa(c)+" ") {
			t.Errorf("root help does not list exit status %d:\n%s", c, stdout)
		}
	}
}

// Same inputs and seed, same bits: two runs with probe-based
// uncertainties give byte-identical result.json files.
func TestUnfoldDeterministic(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), oracleD)
	var got [2][]byte
	for k := range got {
		out := filepath.Join(t.TempDir(), "result")
		code, _, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), "--diagonal-method", "probes", "--probes", "50", "--seed", "7")...)
		if code != exitOK {
			t.Fatalf("exit %d: %s", code, stderr)
		}
		got[k], _ = os.ReadFile(filepath.Join(out, result.JSONFile))
	}
	// The paths differ only in the output folder, which result.json does not record.
	if !bytes.Equal(got[0], got[1]) {
		t.Error("two runs with the same seed differ")
	}
}

// A mistyped index in a tiny table (here 900000000) would make a problem
// of a billion bins; it is refused before anything that large is
// allocated, naming the sizes and what to do, with no folder left.
func TestUnfoldSizesBeyondMemoryLimit(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), map[string]string{
		"A.csv": "reco,truth,value\n0,0,5\n900000000,1,5\n",
		"G.csv": "truth,value\n0,10\n1,10\n",
		"n.csv": "reco,value\n0,4\n",
	})
	out := filepath.Join(dir, "out")
	code, stdout, stderr := runCLI(t, context.Background(), "unfold", "--response", filepath.Join(dir, "A.csv"),
		"--generated", filepath.Join(dir, "G.csv"), "--data", filepath.Join(dir, "n.csv"), "--out", out)
	if code != exitNumerical || !strings.Contains(stderr, "900000001 reco bins") || !strings.Contains(stderr, "--memory-limit") {
		t.Errorf("exit %d, stderr %q; want %d naming the sizes and --memory-limit", code, stderr, exitNumerical)
	}
	if stdout != "" {
		t.Errorf("stdout %q", stdout)
	}
	if _, err := os.Stat(out); err == nil {
		t.Errorf("output folder %s left behind", out)
	}
}

// The summary says how the iteration stopped, and the notes on stderr
// report clipped reco bins and estimated (not exact) uncertainties.
func TestUnfoldSummaryNotes(t *testing.T) {
	dir := writeFiles(t, t.TempDir(), maps(oracleD, map[string]string{"b.csv": "reco,value\n3,100\n"}))
	for _, c := range []struct {
		name   string
		extra  []string
		stdout string
		stderr string
	}{
		{"converged", []string{"--stop-chi2", "1e6"}, "1 iterations (stopped by chi2: chi-square below 1e+06)", ""},
		{"not converged", []string{"--stop-chi2", "1e-300", "--max-iterations", "2"}, "2 iterations (stopped by max_iterations: maximum reached", ""},
		// Background 100 above the 87 counts of reco bin 3.
		{"clipped", []string{"--background", filepath.Join(dir, "b.csv"), "--background-mode", "subtract"}, "", "in 1 reco bins the data minus the background was negative"},
		{"probes", []string{"--diagonal-method", "probes", "--probes", "20"}, "", "uncertainties estimated with 20 probes"},
		{"toys", []string{"--diagonal-method", "toys", "--toys", "20"}, "", "uncertainties estimated with 20 toys"},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "result")
			code, stdout, stderr := runCLI(t, context.Background(), append(oracleDArgs(dir, out), c.extra...)...)
			if code != exitOK || !strings.Contains(stdout, c.stdout) || !strings.Contains(stderr, c.stderr) {
				t.Errorf("exit %d; stdout %q lacks %q or stderr %q lacks %q", code, stdout, c.stdout, stderr, c.stderr)
			}
		})
	}
}

func TestUnfoldResponseSamples(t *testing.T) {
	// Oracle D with unweighted simulation (sumw2 = value, N_eff = G):
	// the simulation source joins the data's and the total is their sum
	// (method.md §18 Sources of uncertainty and their total; the
	// sampling itself is tested in package unfold against method.md §20).
	dir := writeFiles(t, t.TempDir(), maps(oracleD, map[string]string{"G.csv": "truth,value,sumw2\n0,1000,1000\n1,1000,1000\n2,1000,1000\n"}))
	out := filepath.Join(t.TempDir(), "result")
	args := append(oracleDArgs(dir, out), "--covariance", "full", "--response-samples", "200", "--sampling-prior", "flat", "--seed", "5")
	if code, _, stderr := runCLI(t, context.Background(), args...); code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, raw := readResult(t, out)
	if len(r.Sources) != 2 || r.Sources[0].Name != "data" || r.Sources[1].Name != "simulation" || r.Sources[1].Method != "dirichlet-samples" || r.Sources[1].Samples != 200 {
		t.Fatalf("sources %+v", r.Sources)
	}
	for j, u := range r.Uncertainty {
		d, s := r.Sources[0].Uncertainty[j], r.Sources[1].Uncertainty[j]
		if !(s > 0) || math.Abs(u*u-(d*d+s*s)) > 1e-9*u*u {
			t.Errorf("bin %d: total %v, data %v, simulation %v", j, u, d, s)
		}
		if c := r.Covariance[j][j]; math.Abs(c-u*u) > 1e-9*c {
			t.Errorf("bin %d: total covariance %v, variance %v", j, c, u*u)
		}
	}
	if r.Settings.ResponseSamples != 200 || r.Settings.SamplingPrior != "flat" {
		t.Errorf("settings %+v", r.Settings)
	}
	if rs := r.RandomStreams; rs == nil || rs.Seed != 5 || len(rs.Streams) != 1 || rs.Streams[0].Unit != "response-sample" || rs.Streams[0].Offset != 4<<32 {
		t.Errorf("random streams %+v", r.RandomStreams)
	}
	if _, ok := raw["random_streams"]; !ok {
		t.Error("result.json has no random_streams")
	}
}
