//go:build !amd64 || purego

package sparse

// useAVX is false in builds without the assembly loop (other
// architectures, or the purego build tag): sweep8 is the Go loop.
var useAVX = false

// sweep8 is the SweepBlock loop for 8 vectors: see sweep8Go.
func (ws *workspace) sweep8(buf []float64, lo int, colPtr []int, c0, c1 int, g, x *[8]float64) {
	ws.sweep8Go(buf, lo, colPtr, c0, c1, g, x)
}
