package result

import (
	"context"
	"encoding/csv"
	"math"
	"os"
	"path/filepath"
	"reflect"
	"strconv"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// readCSV reads the table name of folder dir.
func readCSV(t *testing.T, dir, name string) [][]string {
	t.Helper()
	f, err := os.Open(filepath.Join(dir, name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return rows
}

func num(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// problemD is problem D of method.md §10 Reference values used by the
// tests (3 truth × 4 reco bins) with a background of known variance, the
// generated counts all g (so A = g R).
func problemD(t *testing.T, g float64) *unfold.Problem {
	t.Helper()
	// R with rows = reco, columns = truth.
	cols := [][]float64{{0.60, 0.20, 0.05, 0}, {0.10, 0.60, 0.15, 0.05}, {0, 0.10, 0.60, 0.20}}
	var ptr, row []int
	var val []float64
	ptr = append(ptr, 0)
	for _, c := range cols {
		for i, v := range c {
			if v != 0 {
				row, val = append(row, i), append(val, g*v)
			}
		}
		ptr = append(ptr, len(row))
	}
	a, err := sparse.NewMatrix(4, 3, ptr, row, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return &unfold.Problem{Migrations: a, Generated: []float64{g, g, g}, Data: []float64{667, 578, 325, 87},
		Background: []float64{20, 5, 30, 10}, BackgroundVariance: []float64{4, 1, 9, 0}}
}

// diagnosticsProblem unfolds problem D (G = 1, so A = R) with the full
// covariance and returns the document.
func diagnosticsProblem(t *testing.T) *Result {
	t.Helper()
	r, _ := unfoldDoc(t, problemD(t, 1), &unfold.Settings{Covariance: unfold.Full}, &bayes.Settings{Iterations: 3})
	return r
}

// unfoldDoc unfolds p and returns the document (with SetProblem) and the
// kernel's result.
func unfoldDoc(t *testing.T, p *unfold.Problem, s *unfold.Settings, m unfold.Method) (*Result, *unfold.Result) {
	t.Helper()
	res, err := unfold.Unfold(context.Background(), p, s, m)
	if err != nil {
		t.Fatal(err)
	}
	r, err := FromUnfold(res)
	if err != nil {
		t.Fatal(err)
	}
	r.SetProblem(p)
	return r, res
}

// The pulls and the folded chi-square follow method.md §16 Folded
// comparison, evaluated here by hand from the data, the background
// variance and the folded expectation; the correlation is the definition
// ρ_jk = V_jk / sqrt(V_jj V_kk) (same section); every diagnostic table
// reads back to the document's numbers.
func TestDiagnostics(t *testing.T) {
	r := diagnosticsProblem(t)
	n := []float64{667, 578, 325, 87}
	vb := []float64{4, 1, 9, 0}
	chi2 := 0.0
	pulls := r.Pulls()
	for i := range n {
		want := (n[i] - r.Folded[i]) / math.Sqrt(n[i]+vb[i])
		if math.Abs(pulls[i]-want) > 1e-12 {
			t.Errorf("pull %d = %v, want %v", i, pulls[i], want)
		}
		chi2 += want * want
	}
	if math.Abs(r.FoldedChi2-chi2) > 1e-12*chi2 || r.FoldedBins != 4 {
		t.Errorf("folded chi2 %v over %d bins, want %v over 4", r.FoldedChi2, r.FoldedBins, chi2)
	}
	if !reflect.DeepEqual(r.DataVariance, n) {
		t.Errorf("data variance %v, want the Poisson variance n", r.DataVariance)
	}
	rho := r.Correlation()
	for j := range rho {
		for k := range rho {
			want := r.Covariance[j][k] / math.Sqrt(r.Covariance[j][j]*r.Covariance[k][k])
			if math.Abs(rho[j][k]-want) > 1e-12 || rho[j][k] != rho[k][j] {
				t.Errorf("rho[%d][%d] = %v, want %v", j, k, rho[j][k], want)
			}
		}
		if rho[j][j] != 1 {
			t.Errorf("rho[%d][%d] = %v, want 1", j, j, rho[j][j])
		}
	}

	dir, files := writeFolder(t, t.TempDir(), "d", r, nil)
	want := []string{JSONFile, CSVFile, RecoBinsFile, TruthBinsFile, CorrelationFile, HistoryFile, ResponseFile}
	if files = notReportFiles(files); !reflect.DeepEqual(files, want) {
		t.Fatalf("files %v, want %v", files, want)
	}
	reco := readCSV(t, dir, RecoBinsFile)
	if !reflect.DeepEqual(reco[0], []string{"index", "data", "data_variance", "background", "background_variance", "folded", "pull"}) || len(reco) != 5 {
		t.Fatalf("reco-bins.csv header %v, %d rows", reco[0], len(reco))
	}
	for i, rec := range reco[1:] {
		if num(t, rec[1]) != n[i] || num(t, rec[4]) != vb[i] || num(t, rec[5]) != r.Folded[i] || num(t, rec[6]) != pulls[i] {
			t.Errorf("reco-bins.csv row %d: %v", i, rec)
		}
	}
	corr := readCSV(t, dir, CorrelationFile)
	for j := range rho {
		for k := range rho {
			if num(t, corr[j+1][k+1]) != rho[j][k] {
				t.Errorf("correlation.csv [%d][%d] = %s, want %v", j, k, corr[j+1][k+1], rho[j][k])
			}
		}
	}
	hist := readCSV(t, dir, HistoryFile)
	if len(hist) != len(r.History)+1 || len(r.History) != 4 || num(t, hist[4][1]) != r.History[3].Chi2 {
		t.Errorf("history.csv %v against %d steps", hist, len(r.History))
	}
	resp := readCSV(t, dir, ResponseFile)
	if len(resp) != 1+10 || !reflect.DeepEqual(resp[1], []string{"0", "0", "0.6", "0.6"}) || !reflect.DeepEqual(resp[10], []string{"3", "2", "0.2", "0.2"}) {
		t.Errorf("response.csv %v", resp)
	}
	truth := readCSV(t, dir, TruthBinsFile)
	if !reflect.DeepEqual(truth[0], []string{"index", "determined", "generated", "efficiency"}) || num(t, truth[1][3]) != r.Efficiency[0] {
		t.Errorf("truth-bins.csv %v", truth)
	}
}

// Check counts the bins not determined, the in-range bins below the
// efficiency and purity thresholds, and the clipped reco bins.
func TestChecks(t *testing.T) {
	p := func(v float64) *float64 { return &v }
	r := &Result{Determined: []bool{true, true, false, true}, Efficiency: []float64{0.05, 0.5, 0, 0.01},
		Purity: []*float64{p(0.9), p(0.2), nil, p(0.1)}, ClippedRecoBins: []int{3, 4},
		TruthBinning: &Binning{Flow: []bool{false, false, false, true}}}
	got := r.Check()
	want := Checks{Undetermined: 1, LowEfficiency: 1, LowPurity: 1, Clipped: 2}
	if got != want {
		t.Errorf("Check() = %+v, want %+v", got, want)
	}
}
