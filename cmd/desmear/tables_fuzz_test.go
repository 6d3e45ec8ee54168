package main

import (
	"context"
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold/result"
)

// fuzzModes are the extra flags a fuzzed plain-table unfold runs with,
// chosen by the fuzzer's mode byte. They reach the main branches of
// the command: the default (4 iterations, uncertainties by probes or
// exactly), the full covariance, a stop criterion with no uncertainty,
// and a fixed background (fuzzBackground) subtracted from the data or
// fitted in the model with Poisson toys for the uncertainty.
var fuzzModes = [][]string{
	nil,
	{"--covariance", "full"},
	{"--covariance", "none", "--stop-chi2", "1e-9", "--max-iterations", "20"},
	{"--background", "b.csv", "--background-mode", "subtract"},
	{"--background", "b.csv", "--diagonal-method", "toys", "--toys", "20"},
}

// fuzzBackground is the background table of the modes that use one.
// With the Oracle D data its last bin (100 > 87) is clipped when
// subtracted.
const fuzzBackground = "reco,value,variance\n0,30,30\n1,20,20\n2,10,10\n3,100,100\n"

// smallNumbers reports whether every run of digits in s, without its
// leading zeros, has at most 3 digits, so that no bin index reaches
// 1000. A bin index is only bounded by tables.MaxIndex (about 10^9):
// one line naming a large index makes the command allocate several
// arrays of that many bins, which is what the index means but not
// what a fuzzer can afford.
func smallNumbers(s string) bool {
	run := 0
	for i := 0; i < len(s); i++ {
		c := s[i]
		switch {
		case c == '0' && run == 0:
			// a leading zero
		case c >= '0' && c <= '9':
			run++
			if run > 3 {
				return false
			}
		default:
			run = 0
		}
	}
	return true
}

// FuzzUnfoldTables runs the whole plain-table path (reading A.csv, G.csv
// and n.csv, checking them, unfolding, propagating uncertainties,
// writing the result folder) on fuzzed table contents. It guards three
// promises of the command: no input makes it panic (exit 70, a bug);
// a failed run is a classified input or numerical error (exit 3 or 4)
// with one message and leaves no output folder, not even a hidden
// temporary one; and a run that succeeds writes a result.json holding
// only finite numbers.
func FuzzUnfoldTables(f *testing.F) {
	a, g, n := oracleD["A.csv"], oracleD["G.csv"], oracleD["n.csv"]
	for mode := range fuzzModes {
		f.Add(a, g, n, uint8(mode))
	}
	// Malformed and borderline tables (see TestUnfoldBadInput).
	f.Add("reco,truth,value\n0,0,600\n0,1\n", g, n, uint8(0))
	f.Add(a, g, "reco,value\n0,667\n1,abc\n", uint8(0))
	f.Add(a, "truth,value\n0,1000\n1,NaN\n2,1000\n", n, uint8(0))
	f.Add("reco,truth,value\n0,0,600\n1,1,-3\n", g, n, uint8(0))
	f.Add(a, g, "reco,value,variance\n0,667,-1\n", uint8(1))
	f.Add(a, "truth,value\n0,1000\n1,1000\n", n, uint8(0))
	f.Add(a, "truth,value\n0,1000\n1,1000\n2,800\n", n, uint8(0))
	f.Add("# nothing yet\nreco,truth,value\n", g, n, uint8(0))
	f.Add(a, g, "reco,value\n0,667\n1,578\n2,325\n3,87\n5,4\n", uint8(0))
	// All data zero; data only where the response is empty; tiny and
	// huge values; a sumw2 column; CRLF line ends and quoted fields.
	f.Add(a, g, "reco,value\n0,0\n1,0\n2,0\n3,0\n", uint8(1))
	f.Add("reco,truth,value\n0,0,1\n", "truth,value\n0,1\n1,1\n", "reco,value\n1,5\n", uint8(0))
	f.Add("reco,truth,value\n0,0,1e-300\n1,0,1e-300\n", "truth,value\n0,1e-299\n", "reco,value\n0,1e300\n1,1e-300\n", uint8(1))
	f.Add("reco,truth,value,sumw2\n0,0,5,2.5\n1,1,3,1\n", "truth,value,sumw2\n0,10,5\n1,10,5\n", "reco,value,variance\n0,4,4\n1,2,2\n", uint8(2))
	f.Add("truth,reco,value\r\n\"0\",\"1\",2\r\n1,0,3\r\n", "truth,value\r\n0,4\r\n1,4\r\n", "reco,value\r\n0,1\r\n1,1\r\n", uint8(3))
	f.Fuzz(func(t *testing.T, a, g, n string, mode uint8) {
		if !smallNumbers(a) || !smallNumbers(g) || !smallNumbers(n) {
			t.Skip()
		}
		dir := writeFiles(t, t.TempDir(), map[string]string{"A.csv": a, "G.csv": g, "n.csv": n, "b.csv": fuzzBackground})
		parent := t.TempDir()
		out := filepath.Join(parent, "result")
		args := []string{"unfold",
			"--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
			"--data", filepath.Join(dir, "n.csv"), "--out", out}
		for _, x := range fuzzModes[int(mode)%len(fuzzModes)] {
			if strings.HasSuffix(x, ".csv") {
				x = filepath.Join(dir, x)
			}
			args = append(args, x)
		}
		code, stdout, stderr := runCLI(t, context.Background(), args...)
		switch code {
		case exitOK:
		case exitInput, exitNumerical:
			if strings.Count(stderr, "desmear: ") != 1 || strings.Contains(stderr, "goroutine") {
				t.Errorf("exit %d: want one message without a stack trace, got:\n%s", code, stderr)
			}
			if stdout != "" {
				t.Errorf("exit %d: stdout not empty: %q", code, stdout)
			}
			if names := dirNames(t, parent); len(names) != 0 {
				t.Errorf("exit %d left behind %v\nstderr: %s", code, names, stderr)
			}
			return
		default:
			// 70 is a panic; 2 (usage) and 5 (input/output) cannot come
			// from the content of well-named, readable tables.
			t.Fatalf("exit %d, want 0, %d or %d\nstderr:\n%s", code, exitInput, exitNumerical, stderr)
		}
		data, err := os.ReadFile(filepath.Join(out, result.JSONFile))
		if err != nil {
			t.Fatalf("exit 0 without %s: %v", result.JSONFile, err)
		}
		var raw any
		if err := json.Unmarshal(data, &raw); err != nil {
			t.Fatalf("%s is not JSON: %v", result.JSONFile, err)
		}
		if path, ok := nonFinite(raw, ""); !ok {
			t.Errorf("%s holds a non-finite number at %s", result.JSONFile, path)
		}
		var r result.Result
		if err := json.Unmarshal(data, &r); err != nil {
			t.Fatalf("%s does not decode as a result: %v", result.JSONFile, err)
		}
		if len(r.Estimate) != r.TruthBins || len(r.Folded) != r.RecoBins {
			t.Errorf("%d estimates for %d truth bins, %d folded values for %d reco bins", len(r.Estimate), r.TruthBins, len(r.Folded), r.RecoBins)
		}
		for j, v := range r.Estimate {
			if !(v >= 0) {
				t.Errorf("estimate[%d] = %v; an expected count is never negative", j, v)
			}
		}
	})
}

// nonFinite walks a decoded JSON value and reports the path of the
// first number that is not finite, or of a string spelling one ("NaN",
// "Inf", as some encoders write them); ok is false if it finds one.
func nonFinite(v any, path string) (string, bool) {
	switch x := v.(type) {
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return path, false
		}
	case string:
		switch strings.ToLower(strings.TrimLeft(x, "+-")) {
		case "nan", "inf", "infinity":
			return path, false
		}
	case []any:
		for i, e := range x {
			if p, ok := nonFinite(e, path+"["+strconv.Itoa(i)+"]"); !ok {
				return p, false
			}
		}
	case map[string]any:
		for k, e := range x {
			if p, ok := nonFinite(e, path+"."+k); !ok {
				return p, false
			}
		}
	}
	return "", true
}
