package unfold

import (
	"context"
	"errors"
	"testing"
)

// The memory stated before a full covariance is the dense Jacobian (two
// buffers of nt × columns) plus the nt × nt covariance, 8 bytes per
// element (the formula of denseBytes, written out here), with a second
// column per reco bin when the background variance is propagated; and it
// is the figure at which Unfold refuses the computation: at that limit it
// runs, one byte below it is refused with that size.
func TestFullCovarianceBytes(t *testing.T) {
	eff := []float64{0.5, 0.25, 0.8, 0.4}
	p := diagonalProblem(t, eff, []float64{100, 400, 64, 900})
	p.Background = []float64{1, 2, 3, 4}
	p.BackgroundVariance = []float64{1, 2, 3, 4}
	const nt, nr = 4, 4
	for _, c := range []struct {
		name string
		s    Settings
		want int64
	}{
		{"in model, background variance", Settings{Covariance: Full}, 16*nt*2*nr + 8*nt*nt},
		{"subtracted", Settings{Covariance: Full, Background: Subtract}, 16*nt*nr + 8*nt*nt},
		{"diagonal", Settings{Covariance: Diagonal}, 0},
	} {
		got, err := FullCovarianceBytes(p, &c.s)
		if err != nil || got != c.want {
			t.Fatalf("%s: %d bytes (%v), want %d", c.name, got, err, c.want)
		}
		if c.want == 0 {
			continue
		}
		s := c.s
		s.MemoryLimit = got
		if _, err := Unfold(context.Background(), p, &s, binByBin{}); err != nil {
			t.Errorf("%s: at the stated size: %v", c.name, err)
		}
		s.MemoryLimit = got - 1
		_, err = Unfold(context.Background(), p, &s, binByBin{})
		var tl *TooLargeError
		if !errors.As(err, &tl) || tl.Bytes != got {
			t.Errorf("%s: one byte below the stated size: %v", c.name, err)
		}
	}
}
