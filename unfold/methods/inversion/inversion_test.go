package inversion

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// The inversion of a symmetric 2×2 migration R = [[1−p, p], [p, 1−p]]
// with Poisson data n = (1000, 1000) has
// Var x_1 = ((1−p)² n_1 + p² n_2)/(1−2p)² and correlation
// −2p(1−p)/((1−p)² + p²): p = 0.3 gives 3625 and −0.724138, p = 0.1 gives
// 1281.25 and −0.219512 (method.md §10 Reference values used by the tests, problem G; closed form, derived there).
// The condition number of R is 1/(1−2p) (closed form, derived here: the
// singular values of the symmetric R are its eigenvalues 1 and 1−2p).
func TestInversion2x2(t *testing.T) {
	for _, c := range []struct{ p, variance, corr float64 }{{0.3, 3625, -0.724138}, {0.1, 1281.25, -0.219512}} {
		g := 1e4
		a, err := sparse.NewMatrix(2, 2, []int{0, 2, 4}, []int{0, 1, 0, 1}, []float64{(1 - c.p) * g, c.p * g, c.p * g, (1 - c.p) * g}, nil)
		if err != nil {
			t.Fatal(err)
		}
		p := &unfold.Problem{Migrations: a, Generated: []float64{g, g}, Data: []float64{1000, 1000}}
		res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Full}, &Settings{})
		if err != nil {
			t.Fatal(err)
		}
		cov := res.Covariance
		if v := cov.At(0, 0); math.Abs(v-c.variance) > 1e-9*c.variance {
			t.Errorf("p = %v: Var x1 = %v, want %v", c.p, v, c.variance)
		}
		if r := cov.At(0, 1) / math.Sqrt(cov.At(0, 0)*cov.At(1, 1)); math.Abs(r-c.corr) > 1e-6 {
			t.Errorf("p = %v: correlation %v, want %v", c.p, r, c.corr)
		}
		if e := res.Estimate; math.Abs(e[0]-1000) > 1e-9 || math.Abs(e[1]-1000) > 1e-9 {
			t.Errorf("p = %v: estimate %v, want R⁻¹ n = (1000, 1000)", c.p, e)
		}
		if k := DetailsOf(res).Condition; math.Abs(k-1/(1-2*c.p)) > 1e-12 {
			t.Errorf("p = %v: condition number %v, want %v", c.p, k, 1/(1-2*c.p))
		}
	}
}

// A singular response (p = 0.5) is refused with a numerical error.
func TestInversionSingular(t *testing.T) {
	a, _ := sparse.NewMatrix(2, 2, []int{0, 2, 4}, []int{0, 1, 0, 1}, []float64{5, 5, 5, 5}, nil)
	p := &unfold.Problem{Migrations: a, Generated: []float64{10, 10}, Data: []float64{1000, 1000}}
	_, err := unfold.Unfold(context.Background(), p, nil, &Settings{})
	if _, ok := err.(*unfold.NumericalError); !ok {
		t.Errorf("singular response: %v, want a numerical error", err)
	}
}
