package main

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold/result"
)

// oracleDR is the response of oracle D (rows reco, method.md §10
// Reference values used by the tests, problem D) and its data.
var (
	oracleDR = mat.NewDense(4, 3, []float64{0.60, 0.10, 0, 0.20, 0.60, 0.10, 0.05, 0.15, 0.60, 0, 0.05, 0.20})
	oracleDN = []float64{667, 578, 325, 87}
)

// regularised returns (Rᵀ W R + τ² Lᵀ L)⁻¹ Rᵀ W n for oracle D with
// W = diag(1/n) and L the one curvature row (1, −2, 1) along the global
// index (method.md §13 Tikhonov regularisation), solved with gonum's LU.
func regularised(t *testing.T, tau float64) []float64 {
	t.Helper()
	return regularisedWith(t, tau, mat.NewDense(1, 3, []float64{1, -2, 1}))
}

// regularisedWith is regularised with the penalty rows l.
func regularisedWith(t *testing.T, tau float64, l *mat.Dense) []float64 {
	t.Helper()
	w := make([]float64, 4)
	for i, n := range oracleDN {
		w[i] = 1 / n
	}
	var wr, m mat.Dense
	wr.Mul(mat.NewDiagDense(4, w), oracleDR)
	m.Mul(oracleDR.T(), &wr)
	var ltl mat.Dense
	ltl.Mul(l.T(), l)
	ltl.Scale(tau*tau, &ltl)
	m.Add(&m, &ltl)
	var rhs, x mat.VecDense
	rhs.MulVec(wr.T(), mat.NewVecDense(4, oracleDN))
	if err := x.SolveVec(&m, &rhs); err != nil {
		t.Fatal(err)
	}
	return x.RawVector().Data
}

func methodRun(t *testing.T, extra ...string) (code int, stdout, stderr, out string) {
	t.Helper()
	dir := writeFiles(t, t.TempDir(), oracleD)
	out = filepath.Join(t.TempDir(), "result")
	args := append(oracleDArgs(dir, out), extra...)
	code, stdout, stderr = runCLI(t, context.Background(), args...)
	return code, stdout, stderr, out
}

// --method tikhonov --tau X solves the regularised normal equations
// (compared with gonum's LU solve) and records the method and tau in
// result.json; a fixed tau writes no scan.
func TestUnfoldTikhonovFixedTau(t *testing.T) {
	code, stdout, stderr, out := methodRun(t, "--method", "tikhonov", "--tau", "0.01")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, raw := readResult(t, out)
	want := regularised(t, 0.01)
	for j, x := range want {
		if math.Abs(r.Estimate[j]-x) > 1e-9*x {
			t.Errorf("estimate[%d] = %v, want %v", j, r.Estimate[j], x)
		}
	}
	if r.Settings.Method != "tikhonov" || r.Settings.Tau != 0.01 || r.Tikhonov == nil || r.Tikhonov.Tau != 0.01 || r.Tikhonov.Criterion != "fixed" {
		t.Errorf("settings %+v, tikhonov %+v", r.Settings, r.Tikhonov)
	}
	if _, ok := raw["history"]; !ok || r.Uncertainty == nil {
		t.Error("result.json lacks the history field or the uncertainty")
	}
	if _, err := os.Stat(filepath.Join(out, result.TauScanFile)); err == nil {
		t.Error("a fixed tau wrote a scan")
	}
	if !strings.Contains(stdout, "with tikhonov, tau = 0.01 (fixed)") {
		t.Errorf("summary:\n%s", stdout)
	}
}

// --penalty slope penalises first differences (rows x_{j+1} − x_j; §13):
// the estimate equals gonum's solve of those normal equations, and the
// penalty is recorded.
func TestUnfoldTikhonovSlope(t *testing.T) {
	code, _, stderr, out := methodRun(t, "--method", "tikhonov", "--tau", "0.5", "--penalty", "slope")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	want := regularisedWith(t, 0.5, mat.NewDense(2, 3, []float64{-1, 1, 0, 0, -1, 1}))
	for j, x := range want {
		if math.Abs(r.Estimate[j]-x) > 1e-9*x {
			t.Errorf("estimate[%d] = %v, want %v", j, r.Estimate[j], x)
		}
	}
	if r.Tikhonov.Penalty != "slope" || r.Tikhonov.Bias != "zero" || r.Tikhonov.PenaltyRows != 2 {
		t.Errorf("tikhonov %+v", r.Tikhonov)
	}
}

// Without --tau the L-curve chooses tau from the scan, written as
// tau-scan.csv with the chosen row marked; the criterion is recorded.
func TestUnfoldTikhonovLCurve(t *testing.T) {
	code, _, stderr, out := methodRun(t, "--method", "tikhonov", "--tau-criterion", "lcurve")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	if r.Settings.TauCriterion != "lcurve" || r.Tikhonov.Criterion != "lcurve" || len(r.Tikhonov.Scan) != 31 {
		t.Fatalf("settings %+v, tikhonov %+v", r.Settings, r.Tikhonov)
	}
	want := regularised(t, r.Tikhonov.Tau)
	for j, x := range want {
		if math.Abs(r.Estimate[j]-x) > 1e-9*x {
			t.Errorf("estimate[%d] = %v, want %v at the chosen tau", j, r.Estimate[j], x)
		}
	}
	recs := readCSV(t, filepath.Join(out, result.TauScanFile))
	chosen := 0
	for _, rec := range recs[1:] {
		if rec[7] == "true" {
			chosen++
		}
	}
	if len(recs) != 32 || chosen != 1 {
		t.Errorf("tau-scan.csv: %d rows, %d chosen", len(recs), chosen)
	}
}

// --method inversion is the unregularised least squares (gonum LU with
// tau = 0) with the condition number in result.json; bin-by-bin refuses
// 4 reco bins for 3 truth bins as bad input.
func TestUnfoldInversionAndBinByBin(t *testing.T) {
	code, stdout, stderr, out := methodRun(t, "--method", "inversion")
	if code != exitOK {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	r, _ := readResult(t, out)
	for j, x := range regularised(t, 0) {
		if math.Abs(r.Estimate[j]-x) > 1e-9*x {
			t.Errorf("estimate[%d] = %v, want %v", j, r.Estimate[j], x)
		}
	}
	if r.Inversion == nil || !(r.Inversion.Condition > 1) || !strings.Contains(stdout, "condition number") {
		t.Errorf("inversion %+v\n%s", r.Inversion, stdout)
	}
	code, _, stderr, _ = methodRun(t, "--method", "bin-by-bin")
	if code != exitInput || !strings.Contains(stderr, "same truth and reco binning") {
		t.Errorf("bin-by-bin on 4 reco × 3 truth bins: exit %d, %s", code, stderr)
	}
}

// A method's own flags are refused with another method.
func TestMethodFlagsRefused(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"--method", "tikhonov", "--iterations", "3"}, "--iterations applies only to --method dagostini (the method is tikhonov)"},
		{[]string{"--tau", "0.5"}, "--tau applies only to --method tikhonov (the method is dagostini)"},
		{[]string{"--method", "inversion", "--tau-criterion", "correlation"}, "--tau-criterion applies only to --method tikhonov"},
		{[]string{"--method", "tikhonov", "--tau", "1", "--tau-criterion", "lcurve"}, "give either --tau (a fixed tau) or --tau-criterion"},
		{[]string{"--method", "tikhonov", "--tau", "0"}, "--tau 0: give a tau > 0"},
		{[]string{"--penalty", "slope"}, "--penalty applies only to --method tikhonov (the method is dagostini)"},
		{[]string{"--bias", "prior"}, "--bias applies only to --method tikhonov"},
		{[]string{"--method", "tikhonov", "--penalty", "wiggle"}, "wiggle"},
		{[]string{"--method", "tikhonov", "--divide-by-widths"}, "--divide-by-widths needs --truth-binning"},
	} {
		code, _, stderr, _ := methodRun(t, c.args...)
		if code != exitUsage || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, %s", c.args, code, stderr)
		}
	}
}

// An analysis file choosing tikhonov runs it with the penalty along the
// truth binning's axes: the summary names the method and tau, and the
// result folder holds tau-scan.csv and the method's outcome; a key of
// the iterative method is refused with it at its line.
func TestAnalysisTikhonov(t *testing.T) {
	path := writeCLIAnalysis(t)
	text, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	tk := strings.Replace(string(text), "  iterations: 3", "  method: tikhonov\n  tau_criterion: lcurve", 1)
	if err := os.WriteFile(path, []byte(tk), 0o644); err != nil {
		t.Fatal(err)
	}
	code, stdout, stderr := runCLI(t, context.Background(), "unfold", path)
	if code != exitOK || !strings.Contains(stdout, "method: tikhonov, tau = ") {
		t.Fatalf("exit %d\n%s%s", code, stdout, stderr)
	}
	dir := filepath.Join(filepath.Dir(path), "result")
	r, _ := readResult(t, dir)
	if r.Settings.Method != "tikhonov" || r.Tikhonov == nil || r.Tikhonov.PenaltyRows == 0 || r.Tikhonov.Criterion != "lcurve" {
		t.Errorf("settings %+v, tikhonov %+v", r.Settings, r.Tikhonov)
	}
	if _, err := os.Stat(filepath.Join(dir, result.TauScanFile)); err != nil {
		t.Errorf("no scan table: %v", err)
	}
	bad := strings.Replace(tk, "  tau_criterion: lcurve", "  tau_criterion: lcurve\n  iterations: 3", 1)
	if err := os.WriteFile(path, []byte(bad), 0o644); err != nil {
		t.Fatal(err)
	}
	code, _, stderr = runCLI(t, context.Background(), "unfold", path, "--force")
	if code != exitInput || !strings.Contains(stderr, "unfolding.iterations: applies only to method dagostini") {
		t.Errorf("iterations with tikhonov: exit %d, %s", code, stderr)
	}
}
