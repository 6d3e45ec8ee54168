//go:build !purego

package sparse

import (
	"unsafe"

	"golang.org/x/sys/cpu"
)

// useAVX selects the assembly loop of sweep8: true where the processor
// has AVX and the operating system saves its registers (cpu.X86.HasAVX
// checks both). Tests set it to false to run the Go loop, sweep8Go, which
// the build tag purego selects everywhere.
var useAVX = cpu.X86.HasAVX

// gather8 sets dst[s] = Σ_k v[k] y_s[ri[k]] for the 8 vectors y_s
// interleaved at y, each vector in the four chains k mod 4 of sweep8Go
// (the tail into the first) added as (s0+s1)+(s2+s3), with 256-bit
// multiplies and adds (no fused multiply-add), so that dst gets the bits of
// sweep8Go. It reads y at rows ri only and checks no bounds: the caller
// does. v must be at least as long as ri. Implemented in sweep8_amd64.s.
//
//go:noescape
func gather8(dst *[8]float64, y *float64, ri []int, v []float64)

// scatter8 adds v[k]·x[s] to element s of row ri[k]-lo of the 8
// interleaved vectors at d, for every k, as sweep8Go does. It checks no
// bounds: the caller does. v must be at least as long as ri. Implemented
// in sweep8_amd64.s.
//
//go:noescape
func scatter8(d *float64, lo int, ri []int, v []float64, x *[8]float64)

// sweep8 is the SweepBlock loop for 8 vectors (see sweep8Go): per column
// the gather and the scatter in assembly, the update between them in Go.
func (ws *workspace) sweep8(buf []float64, lo int, colPtr []int, c0, c1 int, g, x *[8]float64) {
	if !useAVX {
		ws.sweep8Go(buf, lo, colPtr, c0, c1, g, x)
		return
	}
	rowIdx, val, y, update := ws.m.rowIdx, ws.m.val, ws.x, ws.updateBlock
	yp, bp := unsafe.SliceData(y), unsafe.SliceData(buf)
	for jj := 0; jj < c1-c0; jj++ {
		ri := rowIdx[colPtr[jj]:colPtr[jj+1]]
		v := val[colPtr[jj]:colPtr[jj+1]]
		v = v[:len(ri)]
		// The rows of a column increase strictly, so its first and last
		// rows bound every access of the assembly.
		if n := len(ri); n > 0 && (ri[0] < lo || 8*(ri[n-1]+1) > len(y) || 8*(ri[n-1]-lo+1) > len(buf)) {
			panic("sparse: sweep8 rows outside the vectors")
		}
		gather8(g, yp, ri, v)
		update(c0+jj, g[:], x[:])
		scatter8(bp, lo, ri, v, x)
	}
}
