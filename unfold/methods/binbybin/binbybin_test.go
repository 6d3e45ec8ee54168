package binbybin

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// For R = [[1−p, p], [p, 1−p]] with generated G = (g1, g2), the factors
// are C_j = G_j / Σ_k A_jk, the estimate (n_j − b_j) C_j and its
// variance C_j² var n_j (closed form, derived here from
// μ_j = (n_j − b_j) C_j, method.md §15 Inversion and bin-by-bin factors).
// With migrations the estimate leans towards the simulated spectrum:
// data folded from a flat truth (1000, 1000) with a steep simulation
// (8000, 2000) come out as (1000·C_1·(1−p)+..., ...), not flat.
func TestFactors(t *testing.T) {
	const pm = 0.2
	g := []float64{8000, 2000}
	a, err := sparse.NewMatrix(2, 2, []int{0, 2, 4}, []int{0, 1, 0, 1}, []float64{(1 - pm) * g[0], pm * g[0], pm * g[1], (1 - pm) * g[1]}, nil)
	if err != nil {
		t.Fatal(err)
	}
	n := []float64{1000, 1000} // R (1000, 1000) with R symmetric and eps = 1
	prob := &unfold.Problem{Migrations: a, Generated: g, Data: n, Background: []float64{10, 20}}
	res, err := unfold.Unfold(context.Background(), prob, &unfold.Settings{Covariance: unfold.Full}, &Settings{})
	if err != nil {
		t.Fatal(err)
	}
	reco := []float64{(1-pm)*g[0] + pm*g[1], pm*g[0] + (1-pm)*g[1]}
	for j := range g {
		c := g[j] / reco[j]
		if f := DetailsOf(res).Factors[j]; math.Abs(f-c) > 1e-12*c {
			t.Errorf("factor %d = %v, want %v", j, f, c)
		}
		want := (n[j] - prob.Background[j]) * c
		if math.Abs(res.Estimate[j]-want) > 1e-9*want {
			t.Errorf("estimate %d = %v, want %v", j, res.Estimate[j], want)
		}
		if v := res.Covariance.At(j, j); math.Abs(v-c*c*n[j]) > 1e-9*v {
			t.Errorf("variance %d = %v, want %v", j, v, c*c*n[j])
		}
	}
	if res.Covariance.At(0, 1) != 0 {
		t.Error("bin-by-bin estimates are correlated")
	}
	if math.Abs(res.Estimate[0]-res.Estimate[1]) < 100 {
		t.Errorf("estimate %v is flat: the bias towards the simulation is gone", res.Estimate)
	}
	if DetailsOf(res).Caution == "" {
		t.Error("no caution label")
	}
}

// Different numbers of truth and reco bins are refused.
func TestNeedsSameBinning(t *testing.T) {
	a, _ := sparse.NewMatrix(3, 2, []int{0, 1, 2}, []int{0, 2}, []float64{5, 5}, nil)
	p := &unfold.Problem{Migrations: a, Generated: []float64{10, 10}, Data: []float64{100, 0, 100}}
	if _, err := unfold.Unfold(context.Background(), p, nil, &Settings{}); err == nil {
		t.Error("bin-by-bin accepted 3 reco bins for 2 truth bins")
	}
}
