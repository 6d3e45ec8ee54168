package bayes

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// The variance from the expectation (method.md §24 Data variance from the
// expectation) is the linearised propagation V = J diag(var n) Jᵀ of
// method.md §8 with var n_i = ν_i, the folded expectation of the
// estimate: the same covariance, to rounding, as the propagation of data
// given with the variances ν (the iteration itself does not use the
// variances, so J is the same). With a background in the model and in
// Subtract mode; the probes take it too.
func TestVarianceFromExpectation(t *testing.T) {
	for _, bkg := range []bool{false, true} {
		for _, mode := range []unfold.BackgroundMode{unfold.InModel, unfold.Subtract} {
			if mode == unfold.Subtract && !bkg {
				continue
			}
			p := randomProblem(t, 5, 12, 16, 4, bkg)
			m := &Settings{Iterations: 6}
			exp := &unfold.Settings{Covariance: unfold.Full, Background: mode, VarianceFrom: unfold.FromExpectation}
			res, err := unfold.Unfold(context.Background(), p, exp, m)
			if err != nil {
				t.Fatal(err)
			}
			q := *p
			q.DataVariance = make([]float64, len(p.Data))
			for i, nu := range res.Folded {
				q.DataVariance[i] = nu // Result.Folded holds the background in both modes; Subtract adds var b itself
			}
			ref, err := unfold.Unfold(context.Background(), &q, &unfold.Settings{Covariance: unfold.Full, Background: mode}, m)
			if err != nil {
				t.Fatal(err)
			}
			obs, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Full, Background: mode}, m)
			if err != nil {
				t.Fatal(err)
			}
			differs := false
			for i := range res.Estimate {
				for j := range res.Estimate {
					a, b := res.Covariance.At(i, j), ref.Covariance.At(i, j)
					if math.Abs(a-b) > 1e-9*math.Sqrt(ref.Covariance.At(i, i)*ref.Covariance.At(j, j)) {
						t.Fatalf("bkg %v mode %v: cov[%d][%d] %v, by given variances %v", bkg, mode, i, j, a, b)
					}
					if math.Abs(a-obs.Covariance.At(i, j)) > 1e-6*math.Abs(a) {
						differs = true
					}
				}
			}
			if !differs {
				t.Errorf("bkg %v mode %v: the variance from the expectation equals the one from the counts", bkg, mode)
			}
			// Probes: unbiased for the diagonal, within 5 standard
			// precisions sqrt(2/S) (method.md §9).
			pr, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: 400, Background: mode, VarianceFrom: unfold.FromExpectation}, m)
			if err != nil {
				t.Fatal(err)
			}
			for j, u := range pr.Uncertainty {
				if v := res.Covariance.At(j, j); math.Abs(u*u-v) > 5*math.Sqrt(2.0/400)*v {
					t.Errorf("bkg %v mode %v bin %d: probes %v, exact %v", bkg, mode, j, u*u, v)
				}
			}
		}
	}
	if _, err := (&unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, VarianceFrom: unfold.FromExpectation}).Resolve(); err == nil {
		t.Error("the variance from the expectation with toys was accepted")
	}
}
