//go:build !purego

package bayes

import (
	"unsafe"

	"golang.org/x/sys/cpu"
)

// useAVX selects the assembly loops of ratios: true where the processor
// has AVX and the operating system saves its registers (cpu.X86.HasAVX
// checks both). Tests set it to false to run the Go loop, ratiosGo, which
// the build tag purego selects everywhere.
var useAVX = cpu.X86.HasAVX

// ratiosBgAVX sets y[i] = n[i]/ν_i where ν_i = f[i] + b[i] > 0, and 0
// elsewhere, for i < m, with the bits of ratiosGo. m must be a multiple
// of 4 and every slice at least m long; it checks no bounds. y may be f.
// Implemented in ratio_amd64.s.
//
//go:noescape
func ratiosBgAVX(y, f, b, n *float64, m int)

// ratiosAVX is ratiosBgAVX without a background: ν_i = f[i].
//
//go:noescape
func ratiosAVX(y, f, n *float64, m int)

// ratios sets y[i] = n[i]/ν_i where ν_i = f[i] (+ b[i] when b is not nil)
// is above 0, and 0 elsewhere, with the bits of ratiosGo. The slices
// have the length of f (ratios panics otherwise); y may be f itself,
// but must not overlap f, b or n otherwise.
func ratios(y, f, b, n []float64) {
	if len(y) != len(f) || len(n) != len(f) || b != nil && len(b) != len(f) {
		panic("bayes: ratios length mismatch")
	}
	if !useAVX {
		ratiosGo(y, f, b, n)
		return
	}
	m := len(f) &^ 3
	if m > 0 {
		if b != nil {
			ratiosBgAVX(unsafe.SliceData(y), unsafe.SliceData(f), unsafe.SliceData(b), unsafe.SliceData(n), m)
		} else {
			ratiosAVX(unsafe.SliceData(y), unsafe.SliceData(f), unsafe.SliceData(n), m)
		}
	}
	if m < len(f) {
		var bt []float64
		if b != nil {
			bt = b[m:]
		}
		ratiosGo(y[m:], f[m:], bt, n[m:])
	}
}
