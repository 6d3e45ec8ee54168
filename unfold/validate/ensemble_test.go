package validate

import (
	"context"
	"math"
	"reflect"
	"runtime"
	"testing"

	"github.com/desmear/desmear/unfold"
	"gonum.org/v1/gonum/mat"
)

// diagonal is a problem without migrations: efficiency 0.8 in every bin.
func diagonal(t *testing.T) (*unfold.Problem, []float64) {
	nt := 5
	a := mat.NewDense(nt, nt, nil)
	gen := make([]float64, nt)
	truth := make([]float64, nt)
	for j := range nt {
		gen[j] = 10000 * float64(nt-j)
		a.Set(j, j, 0.8*gen[j])
		truth[j] = 2000 * float64(j+1)
	}
	return denseProblem(t, a, gen), truth
}

// TestDiagonalResponse: without migrations the iteration gives n_j/eps_j
// at every k (method.md §7 Exact properties of the iteration), an
// unbiased estimate whose linearised uncertainty sqrt(n_j)/eps_j makes
// the pulls unit Gaussian and the ±1σ intervals cover 68.27% (large
// Poisson means, common practice). Each figure is checked within three
// times its stated toy precision.
func TestDiagonalResponse(t *testing.T) {
	p, truth := diagonal(t)
	c := &Config{Problem: p, Method: iterations, MaxK: 3, Truth: truth, Toys: 1000, Seed: 11}
	e, err := Run(context.Background(), c, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, pt := range e.Scan() {
		for j := range truth {
			if d := pt.Bias[j]; math.Abs(d) > 3*pt.BiasError[j] {
				t.Errorf("k=%d bin %d: bias %v ± %v", pt.K, j, d, pt.BiasError[j])
			}
			if d := pt.PullMean[j]; math.Abs(d) > 3*pt.PullMeanError[j] {
				t.Errorf("k=%d bin %d: pull mean %v ± %v", pt.K, j, d, pt.PullMeanError[j])
			}
			if d := pt.PullWidth[j] - 1; math.Abs(d) > 3*pt.PullWidthError[j] {
				t.Errorf("k=%d bin %d: pull width %v ± %v", pt.K, j, pt.PullWidth[j], pt.PullWidthError[j])
			}
			if d := pt.Coverage[j] - oneSigma; math.Abs(d) > 3*pt.CoverageExpectedError {
				t.Errorf("k=%d bin %d: coverage %v, want %v ± %v", pt.K, j, pt.Coverage[j], oneSigma, pt.CoverageExpectedError)
			}
			// Poisson variance of n_j/eps_j: t_j/eps_j (closed form).
			want := truth[j] / 0.8
			if d := pt.Variance[j]/want - 1; math.Abs(d) > 3*pt.VarianceRelError {
				t.Errorf("k=%d bin %d: variance %v, want %v (±%.0f%%)", pt.K, j, pt.Variance[j], want, 100*pt.VarianceRelError)
			}
		}
		// Summed MSE: Σ_j t_j/eps_j without bias (closed form).
		var want float64
		for _, x := range truth {
			want += x / 0.8
		}
		if d := pt.MSE - want; math.Abs(d) > 3*pt.MSEError {
			t.Errorf("k=%d: mse %v ± %v, want %v", pt.K, pt.MSE, pt.MSEError, want)
		}
	}
}

// TestMergeSplit: an ensemble split three ways and merged equals one run
// bit for bit, and one run does not depend on the number of cores
// (Chan, Golub, LeVeque 1979 merge in block order).
func TestMergeSplit(t *testing.T) {
	p, truth := diagonal(t)
	c := &Config{Problem: p, Method: iterations, MaxK: 2, Truth: truth, Toys: 170, Seed: 5}
	ctx := context.Background()
	prev := runtime.GOMAXPROCS(1)
	one, err := Run(ctx, c, 0, 0)
	runtime.GOMAXPROCS(prev)
	if err != nil {
		t.Fatal(err)
	}
	var parts []*Ensemble
	for _, r := range [][2]int{{100, 70}, {0, 50}, {50, 50}} {
		e, err := Run(ctx, c, r[0], r[1])
		if err != nil {
			t.Fatal(err)
		}
		parts = append(parts, e)
	}
	merged, err := Merge(parts...)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(one.Scan(), merged.Scan()) {
		t.Error("the merged ensemble differs from one run")
	}
	if _, err := Merge(parts[1], parts[1]); err == nil {
		t.Error("merging the same toys twice was accepted")
	}
	if _, err := Run(ctx, c, 10, 20); err == nil {
		t.Error("a part starting inside a block was accepted")
	}
}
