package unfold

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// A result holding a NaN or an infinity is a *NumericalError naming the
// quantity and the bin (IEEE 754: NaN and ±Inf are not numbers a count
// can take).
func TestResultCheckFinite(t *testing.T) {
	ok := func() *Result {
		return &Result{Estimate: []float64{1, 2}, Efficiency: []float64{0.5, 0.5}, Folded: []float64{1, 1, 1},
			Uncertainty: []float64{1, 1}, Covariance: mat.NewSymDense(2, []float64{1, 0, 0, 1})}
	}
	if err := ok().checkFinite(); err != nil {
		t.Fatalf("finite result: %v", err)
	}
	for _, c := range []struct {
		change func(*Result)
		want   string
	}{
		{func(r *Result) { r.Estimate[1] = math.Inf(1) }, "the estimate of truth bin 1 is +Inf"},
		{func(r *Result) { r.Folded[2] = math.NaN() }, "the folded spectrum of reco bin 2 is NaN"},
		{func(r *Result) { r.Uncertainty[0] = math.Inf(-1) }, "the uncertainty of truth bin 0 is -Inf"},
		{func(r *Result) { r.Covariance.SetSym(0, 1, math.NaN()) }, "the covariance of truth bins 0 and 1 is NaN"},
	} {
		r := ok()
		c.change(r)
		err := r.checkFinite()
		var ne *NumericalError
		if !errors.As(err, &ne) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("got %v, want a *NumericalError with %q", err, c.want)
		}
	}
}
