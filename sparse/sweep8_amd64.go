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

// gather8 sets dst[s] = Σ_k v[k] y[64·ri[k] bytes + s] for the 8 vectors
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

// gather8cols is gather8 for the columns of colPtr (len(colPtr)-1 of
// them, each the non-zeros colPtr[j]..colPtr[j+1]-1 of rowIdx and val),
// into dst[8j:8j+8], with y interleaved by 8 (its len(y)/8 rows). It
// returns false, having written the columns before, at the first column
// with a row outside y. Implemented in sweep8_amd64.s.
//
//go:noescape
func gather8cols(dst, y []float64, colPtr, rowIdx []int, val []float64) bool

// scatter8cols is scatter8 for the columns of colPtr, with the values
// x[8j:8j+8] of column j, into the rows lo..lo+len(d)/8-1 interleaved by
// 8 at d. It returns false, having scattered the columns before, at the
// first column with a row outside d. Implemented in sweep8_amd64.s.
//
//go:noescape
func scatter8cols(d []float64, lo int, colPtr, rowIdx []int, val, x []float64) bool

// sweep8Cols is the number of columns whose gathers sweep8 makes before
// their updates, and whose scatters after: the gathers read only y and
// the scatters write only the destination, which must not alias y, so
// the order of the operations on every element, and the bits, are those
// of sweep8Go, and the update is still called once per column in
// increasing column order.
const sweep8Cols = 64

// sweep8PerColumn selects the gather and scatter per column (for the
// benchmark comparing the two).
var sweep8PerColumn = false

// sweep8 is the SweepBlock loop for 8 vectors (see sweep8Go): the
// gathers and the scatters of up to sweep8Cols columns at a time in
// assembly, the updates between them in Go. gx is its scratch, the
// gathered sums and the update's values of sweep8Cols columns.
func (ws *workspace) sweep8(buf []float64, lo int, colPtr []int, c0, c1 int, gx []float64) {
	if !useAVX {
		ws.sweep8Go(buf, lo, colPtr, c0, c1, (*[8]float64)(gx[:8]), (*[8]float64)(gx[8:16]))
		return
	}
	if sweep8PerColumn {
		ws.sweep8Col(buf, lo, colPtr, c0, c1, (*[8]float64)(gx[:8]), (*[8]float64)(gx[8:16]))
		return
	}
	rowIdx, val, y, update := ws.m.rowIdx, ws.m.val, ws.x, ws.updateBlock
	for j0 := 0; j0 < c1-c0; j0 += sweep8Cols {
		j1 := min(j0+sweep8Cols, c1-c0)
		cp := colPtr[j0 : j1+1]
		g, x := gx[:8*(j1-j0)], gx[8*sweep8Cols:8*(sweep8Cols+j1-j0)]
		if !gather8cols(g, y, cp, rowIdx, val) {
			panic("sparse: sweep8 rows outside y")
		}
		for jj := j0; jj < j1; jj++ {
			o := 8 * (jj - j0)
			update(c0+jj, g[o:o+8:o+8], x[o:o+8:o+8])
		}
		if !scatter8cols(buf, lo, cp, rowIdx, val, x) {
			panic("sparse: sweep8 rows outside the destination")
		}
	}
}

// sweep8Col is sweep8 with the gather and the scatter called per column.
func (ws *workspace) sweep8Col(buf []float64, lo int, colPtr []int, c0, c1 int, g, x *[8]float64) {
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
