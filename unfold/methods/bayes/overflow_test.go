package bayes

import (
	"context"
	"errors"
	"github.com/desmear/desmear/unfold"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// Finite inputs whose magnitudes overflow the iteration (response cells
// of 1e-300 against data of 1e300) give a *NumericalError, not a NaN
// estimate. The same problem scaled to ordinary counts unfolds.
func TestOverflowIsNumericalError(t *testing.T) {
	build := func(a, g, n0, n1 float64) *unfold.Problem {
		m, err := sparse.NewMatrix(2, 1, []int{0, 2}, []int{0, 1}, []float64{a, a}, nil)
		if err != nil {
			t.Fatal(err)
		}
		return &unfold.Problem{Migrations: m, Generated: []float64{g}, Data: []float64{n0, n1}}
	}
	_, err := unfoldWith(context.Background(), build(1e-300, 1e-299, 1e300, 1e-300), &opts{Iterations: 4})
	var ne *unfold.NumericalError
	if !errors.As(err, &ne) {
		t.Fatalf("got %v, want a *NumericalError", err)
	}
	res, err := unfoldWith(context.Background(), build(1, 10, 1e300, 1e300), &opts{Iterations: 4})
	if err != nil {
		t.Fatal(err)
	}
	// Diagonal-like case: eps = 0.2, Σ n = 2e300, so μ = Σn/eps = 1e301
	// after every iteration (conservation Σ eps μ = Σ n, method.md §7 item 1).
	if got := res.Estimate[0]; got < 0.999999e301 || got > 1.000001e301 {
		t.Errorf("estimate %g, want 1e301", got)
	}
}
