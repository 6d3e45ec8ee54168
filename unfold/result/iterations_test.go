package result

import (
	"context"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"gonum.org/v1/gonum/mat"
)

// The iteration scan's tables: the row of iteration k holds, bit for bit,
// what a separate run of k fixed iterations gives (its history step, its
// estimate and its squared uncertainty by the exact propagation), and its
// folded chi-square is Σ_i (n_i − ν_i)²/(var n_i + var b_i) with
// ν = R μ(k) + b computed here densely with gonum from the written
// estimate (method.md §16 Folded comparison). Problem D of method.md §10
// with a background of known variance and another prior.
func TestIterationScan(t *testing.T) {
	ctx := context.Background()
	p := problemD(t, 2)
	p.Prior = []float64{1, 3, 2}
	a := p.Migrations
	s := &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact}
	const K = 7
	r, res := unfoldDoc(t, p, s, &bayes.Settings{Iterations: K, Scan: true})
	dir := filepath.Join(t.TempDir(), "out")
	f, err := New(dir, false)
	if err != nil {
		t.Fatal(err)
	}
	files, err := Write(f, r, nil, []string{IterationsFormat})
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(files, []string{JSONFile, IterationsFile, IterationsBinsFile}) {
		t.Fatalf("files %v", files)
	}
	rows, bins := readCSV(t, dir, IterationsFile), readCSV(t, dir, IterationsBinsFile)
	if len(rows) != K+2 || len(bins) != 3*(K+1)+1 {
		t.Fatalf("%d rows and %d bin rows for %d iterations", len(rows), len(bins), K)
	}
	rd := denseMat(a)
	for k := 1; k <= K; k++ {
		ref, err := unfold.Unfold(ctx, p, s, &bayes.Settings{Iterations: k})
		if err != nil {
			t.Fatal(err)
		}
		st := bayes.DetailsOf(ref).History[k]
		rec := rows[k+1]
		if rec[0] != strconv.Itoa(k) || num(t, rec[1]) != st.Chi2 || num(t, rec[2]) != st.Change || num(t, rec[3]) != st.LogLikelihood {
			t.Errorf("k=%d: row %v, a run of %d iterations %+v", k, rec, k, st)
		}
		est := make([]float64, 3)
		for j := range 3 {
			b := bins[1+k*3+j]
			est[j] = num(t, b[3])
			if b[0] != strconv.Itoa(k) || b[1] != strconv.Itoa(j) || est[j] != ref.Estimate[j] || math.Sqrt(num(t, b[4])) != ref.Uncertainty[j] {
				t.Errorf("k=%d bin %d: %v, a run of %d iterations %v ± %v", k, j, b, k, ref.Estimate[j], ref.Uncertainty[j])
			}
			if v := res.StepVariance[k][j]; v != num(t, b[4]) {
				t.Errorf("k=%d bin %d: variance written %s, kept %v", k, j, b[4], v)
			}
		}
		// ν = A (μ/G) + b, densely
		x := mat.NewVecDense(3, nil)
		for j := range 3 {
			x.SetVec(j, est[j]/p.Generated[j])
		}
		var nu mat.VecDense
		nu.MulVec(rd, x)
		var chi2 float64
		for i, n := range p.Data {
			d := n - nu.AtVec(i) - p.Background[i]
			chi2 += d * d / (n + p.BackgroundVariance[i])
		}
		if got := num(t, rec[4]); !close(got, chi2) {
			t.Errorf("k=%d: folded chi-square %v, from the estimate %v", k, got, chi2)
		}
		if k == K && !close(num(t, rec[4]), r.FoldedChi2) {
			t.Errorf("last folded chi-square %v, the result's %v", rec[4], r.FoldedChi2)
		}
	}
	// without the scan nothing is written
	res, _ = unfold.Unfold(ctx, p, s, &bayes.Settings{Iterations: K})
	if r2, _ := FromUnfold(res); r2.Scan != nil {
		t.Errorf("a scan without Scan")
	}
}

func denseMat(a *sparse.Matrix) *mat.Dense {
	nr, nt := a.Dims()
	d := mat.NewDense(nr, nt, nil)
	cp, ri, v := a.ColPtr(), a.RowIdx(), a.Values()
	for j := range nt {
		for q := cp[j]; q < cp[j+1]; q++ {
			d.Set(ri[q], j, v[q])
		}
	}
	return d
}
