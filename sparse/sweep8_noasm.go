//go:build !amd64 || purego

package sparse

// useAVX is false in builds without the assembly loop (other
// architectures, or the purego build tag): sweep8 is the Go loop.
var useAVX = false

// sweep8Cols is the number of columns of the scratch of sweep8.
const sweep8Cols = 1

// sweep8 is the SweepBlock loop for 8 vectors: see sweep8Go. gx is its
// scratch, 2·8·sweep8Cols long.
func (ws *workspace) sweep8(buf []float64, lo int, colPtr []int, c0, c1 int, gx []float64) {
	ws.sweep8Go(buf, lo, colPtr, c0, c1, (*[8]float64)(gx[:8]), (*[8]float64)(gx[8:16]))
}
