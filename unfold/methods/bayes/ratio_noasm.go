//go:build !amd64 || purego

package bayes

// useAVX is false: ratios is the Go loop everywhere.
var useAVX = false

// ratios sets y[i] = n[i]/ν_i where ν_i = f[i] (+ b[i] when b is not nil)
// is above 0, and 0 elsewhere. The slices have the length of f (ratios
// panics otherwise); y may be f itself, but must not overlap f, b or n
// otherwise.
func ratios(y, f, b, n []float64) {
	if len(y) != len(f) || len(n) != len(f) || b != nil && len(b) != len(f) {
		panic("bayes: ratios length mismatch")
	}
	ratiosGo(y, f, b, n)
}
