package validate

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// On a response without migrations the iteration gives n_j/eps_j at every
// k (method.md §7 Exact properties of the iteration), an unbiased
// estimate: the bias estimate from the result refolded (method.md §23
// Bias estimate from the refolded result) is zero within its stated
// precision, and that precision is the Poisson closed form
// sqrt(Var μ_j / T) with Var μ_j = ν_j / eps_j² = μ̂_j / eps_j (common
// practice), within the 10% relative precision of a variance from 400
// toys (sqrt(2/399) ≈ 7%). Fixed seed. The generated spectrum is far
// from the data, so toys drawn from it instead of the result would fail
// the closed form of the precision.
func TestBiasDiagonalResponse(t *testing.T) {
	p, truth := diagonal(t)
	for j, x := range truth {
		p.Data[j] = 0.8 * x
	}
	const toys = 400
	for _, m := range []*bayes.Settings{{Iterations: 4}, {StopChi2: 1e-6, MaxIterations: 50}} {
		s := &unfold.Settings{Covariance: unfold.Diagonal, BiasToys: toys, Seed: 11}
		nominal, err := unfold.Unfold(context.Background(), p, s, m)
		if err != nil {
			t.Fatal(err)
		}
		b, err := EstimateBias(context.Background(), p, s, m, nominal, nil)
		if err != nil {
			t.Fatal(err)
		}
		if b.Toys != toys || b.K != bayes.DetailsOf(nominal).Iterations {
			t.Errorf("toys %d, k %d; want %d and %d", b.Toys, b.K, toys, bayes.DetailsOf(nominal).Iterations)
		}
		for j := range truth {
			want := math.Sqrt(nominal.Estimate[j] / 0.8 / toys)
			if math.Abs(b.Error[j]/want-1) > 0.2 {
				t.Errorf("%+v bin %d: bias error %.4g, closed form %.4g", m, j, b.Error[j], want)
			}
			if math.Abs(b.Bias[j]) > 3.5*b.Error[j] {
				t.Errorf("%+v bin %d: bias %.4g ± %.4g, want 0", m, j, b.Bias[j], b.Error[j])
			}
		}
	}
	if _, err := EstimateBias(context.Background(), p, &unfold.Settings{}, &bayes.Settings{}, &unfold.Result{}, nil); err == nil {
		t.Error("a bias estimate without toys was run")
	}
}
