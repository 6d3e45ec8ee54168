package bayes

import (
	"math"
	"math/rand/v2"
	"testing"
)

// ratios (the reco bins' n/ν of the iteration without the logarithm, in
// assembly where the processor has AVX) against a scalar loop written
// here, bit for bit: IEEE 754 division and addition are correctly
// rounded, so packed and scalar forms give the same bits (IEEE 754-2008,
// §4.3 and §5.4.1; common practice), and ν ≤ 0 or NaN gives +0. With and
// without a background, in place (y = f) and into another vector, at
// lengths that are and are not multiples of 4, with special values.
func TestRatiosBits(t *testing.T) {
	special := []float64{0, math.Copysign(0, -1), 1, -1, 3, 1e-310, -1e-310, math.SmallestNonzeroFloat64,
		math.MaxFloat64, -math.MaxFloat64, math.Inf(1), math.Inf(-1), math.NaN(), 0.1, 7e300, 1e-300, 2.5}
	rng := rand.New(rand.NewPCG(5, 6))
	draw := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			if rng.IntN(3) == 0 {
				v[i] = special[rng.IntN(len(special))]
			} else {
				v[i] = rng.NormFloat64() * math.Pow(10, float64(rng.IntN(20)-10))
			}
		}
		return v
	}
	want := func(f, b, n []float64) []float64 {
		y := make([]float64, len(f))
		for i := range f {
			v := f[i]
			if b != nil {
				v = f[i] + b[i]
			}
			if v > 0 {
				y[i] = n[i] / v
			}
		}
		return y
	}
	saved := useAVX
	defer func() { useAVX = saved }()
	for _, avx := range []bool{saved, false} {
		useAVX = avx
		for _, m := range []int{0, 1, 3, 4, 5, 8, 13, 64, 1001} {
			for _, bg := range []bool{false, true} {
				for _, inPlace := range []bool{false, true} {
					f, n := draw(m), draw(m)
					var b []float64
					if bg {
						b = draw(m)
					}
					w := want(f, b, n)
					y := make([]float64, m)
					if inPlace {
						y = f
					}
					ratios(y, f, b, n)
					for i := range w {
						if math.Float64bits(y[i]) != math.Float64bits(w[i]) {
							t.Fatalf("AVX %v, %d bins, background %v, in place %v: bin %d gives %v (%#x), the scalar loop %v (%#x)",
								avx, m, bg, inPlace, i, y[i], math.Float64bits(y[i]), w[i], math.Float64bits(w[i]))
						}
					}
				}
			}
		}
	}
}
