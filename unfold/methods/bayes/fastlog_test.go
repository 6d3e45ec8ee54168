package bayes

import (
	"math"
	"math/rand/v2"
	"testing"
)

// fastLog agrees with the standard library's math.Log (the reference) to
// 5e-16·max(1, |ln x|) over many magnitudes, and hands special values to
// it.
func TestFastLog(t *testing.T) {
	r := rand.New(rand.NewPCG(3, 4))
	for i := 0; i < 1_000_000; i++ {
		x := math.Exp(r.Float64()*1400 - 700)
		switch i % 3 {
		case 1:
			x = r.Float64() * 1000
		case 2:
			x = 1 + (r.Float64()-0.5)*1e-6
		}
		a, b := fastLog(x), math.Log(x)
		if math.Abs(a-b) > 5e-16*math.Max(1, math.Abs(b)) {
			t.Fatalf("fastLog(%v) = %v, math.Log = %v", x, a, b)
		}
	}
	for _, x := range []float64{0, 5e-324, math.Inf(1), math.NaN(), -1} {
		a, b := fastLog(x), math.Log(x)
		if !(a == b || math.IsNaN(a) && math.IsNaN(b)) {
			t.Errorf("fastLog(%v) = %v, math.Log = %v", x, a, b)
		}
	}
}
