package result

import (
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// sourcesResult returns a result of three truth bins (the last not
// determined) with a data source and two systematic ones, and its
// truth binning.
func sourcesResult(t *testing.T) (*unfold.Result, *binning.Scheme) {
	t.Helper()
	r := &unfold.Result{
		Estimate:   []float64{10, 20, 0},
		Determined: []bool{true, true, false},
		Efficiency: []float64{0.5, 0.8, 0},
		Folded:     []float64{3, 4},
		Details:    &bayes.Details{Iterations: 2, History: []bayes.Step{{}, {Iteration: 1}, {Iteration: 2}}},
	}
	r.AddSource(unfold.Source{Name: unfold.SourceData, Method: "linearised", Variance: []float64{4, 9, 0}, Covariance: mat.NewSymDense(3, []float64{4, 1, 0, 1, 9, 0, 0, 0, 0})})
	r.AddSource(unfold.ShiftSource("tilt", r.Estimate, []float64{11, 18, 5}, r.Determined, true))
	r.AddSource(unfold.PairSource("energy scale", r.Estimate, []float64{10.5, 23, 1}, []float64{9.5, 19, 1}, r.Determined, true))
	ax, err := binning.NewAxis("x", "GeV", []float64{0, 1, 2, 3}, false, false)
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
	return r, s
}

// The breakdown files: sources.csv (each source's uncertainty, the total
// the root of their summed variances: method.md §18 Sources of
// uncertainty and their total), shifts.csv (the signed shifts, the
// pair's half-difference and one-sided shifts: method.md §21 Systematic
// variations), the covariance of each source (a shift's the outer
// product of the shift, §21) and the region table's parts.
func TestSourcesFiles(t *testing.T) {
	ur, s := sourcesResult(t)
	doc, err := FromUnfold(ur)
	if err != nil {
		t.Fatal(err)
	}
	dir, files := writeFolder(t, t.TempDir(), "out", doc, s)
	for _, f := range []string{SourcesFile, ShiftsFile, "covariance-data.csv", "covariance-tilt.csv", "covariance-energy_scale.csv"} {
		if !slices.Contains(files, f) {
			t.Errorf("%s not written (files %v)", f, files)
		}
	}
	shift := map[string][]float64{"tilt": {1, -2, 0}, "energy scale": {0.5, 2, 0}}
	data := []float64{2, 3, 0}

	rows := readCSV(t, dir, SourcesFile)
	if !slices.Equal(rows[0], []string{"index", "region", "flow", "data", "tilt", "energy scale", "total"}) || len(rows) != 4 {
		t.Fatalf("sources.csv header %v, %d rows", rows[0], len(rows))
	}
	for j, row := range rows[1:] {
		want := []float64{data[j], math.Abs(shift["tilt"][j]), math.Abs(shift["energy scale"][j])}
		sum := 0.0
		for k, w := range want {
			if got := num(t, row[3+k]); got != w {
				t.Errorf("sources.csv bin %d column %s: %v, want %v", j, rows[0][3+k], got, w)
			}
			sum += w * w
		}
		if got := num(t, row[6]); math.Abs(got-math.Sqrt(sum)) > 1e-14 {
			t.Errorf("sources.csv bin %d total %v, want %v", j, got, math.Sqrt(sum))
		}
	}

	rows = readCSV(t, dir, ShiftsFile)
	if !slices.Equal(rows[0], []string{"index", "region", "flow", "tilt", "energy scale", "energy scale_up", "energy scale_down"}) {
		t.Fatalf("shifts.csv header %v", rows[0])
	}
	up, down := []float64{0.5, 3, 0}, []float64{-0.5, -1, 0}
	for j, row := range rows[1:] {
		for k, w := range []float64{shift["tilt"][j], shift["energy scale"][j], up[j], down[j]} {
			if got := num(t, row[3+k]); got != w {
				t.Errorf("shifts.csv bin %d column %s: %v, want %v", j, rows[0][3+k], got, w)
			}
		}
	}

	for name, file := range map[string]string{"tilt": "covariance-tilt.csv", "energy scale": "covariance-energy_scale.csv"} {
		rows := readCSV(t, dir, file)
		for i := range 3 {
			for j := range 3 {
				if got, w := num(t, rows[1+i][1+j]), shift[name][i]*shift[name][j]; got != w {
					t.Errorf("%s[%d][%d] = %v, want %v", file, i, j, got, w)
				}
			}
		}
	}

	rows = readCSV(t, dir, RegionFile("all"))
	col := func(name string) int { return slices.Index(rows[0], name) }
	for j, row := range rows[1:] {
		sys := math.Hypot(shift["tilt"][j], shift["energy scale"][j])
		if got := num(t, row[col("uncertainty_data")]); got != data[j] {
			t.Errorf("region bin %d: data part %v, want %v", j, got, data[j])
		}
		if got := num(t, row[col("uncertainty_systematic")]); math.Abs(got-sys) > 1e-14 {
			t.Errorf("region bin %d: systematic part %v, want %v", j, got, sys)
		}
		if got := row[col("uncertainty_simulation")]; got != "" {
			t.Errorf("region bin %d: simulation part %q without a simulation source", j, got)
		}
		if got, w := num(t, row[col("uncertainty")]), math.Sqrt(data[j]*data[j]+sys*sys); math.Abs(got-w) > 1e-14 {
			t.Errorf("region bin %d: total %v, want %v", j, got, w)
		}
	}
}

// With the data's source alone there is no breakdown to write; without a
// covariance no covariance files.
func TestSourcesFilesLeftOut(t *testing.T) {
	ur, s := sourcesResult(t)
	ur.Sources = ur.Sources[:1]
	doc, err := FromUnfold(ur)
	if err != nil {
		t.Fatal(err)
	}
	_, files := writeFolder(t, t.TempDir(), "one", doc, s)
	if slices.Contains(files, SourcesFile) || slices.Contains(files, "covariance-data.csv") {
		t.Errorf("files %v", files)
	}
	ur, s = sourcesResult(t)
	for k := range ur.Sources {
		ur.Sources[k].Covariance = nil
	}
	ur.Covariance = nil
	doc, err = FromUnfold(ur)
	if err != nil {
		t.Fatal(err)
	}
	_, files = writeFolder(t, t.TempDir(), "diag", doc, s)
	if !slices.Contains(files, SourcesFile) || !slices.Contains(files, ShiftsFile) || slices.Contains(files, "covariance-tilt.csv") {
		t.Errorf("files %v", files)
	}
}
