package binning

import (
	"math/rand/v2"
	"testing"
)

// uniformEdges returns n+1 equally spaced edges from lo to hi.
func uniformEdges(n int, lo, hi float64) []float64 {
	e := make([]float64, n+1)
	for i := range e {
		e[i] = lo + (hi-lo)*float64(i)/float64(n)
	}
	return e
}

// grid3D is the 100x100x50 benchmark grid, with all flows on.
func grid3D(tb testing.TB) *Scheme {
	tb.Helper()
	x, err := NewAxis("x", "", uniformEdges(100, 0, 1), true, true)
	if err != nil {
		tb.Fatal(err)
	}
	y, err := NewAxis("y", "", uniformEdges(100, 0, 1), true, true)
	if err != nil {
		tb.Fatal(err)
	}
	z, err := NewAxis("z", "", uniformEdges(50, 0, 1), true, true)
	if err != nil {
		tb.Fatal(err)
	}
	reg, err := NewRegion("grid", x, y, z)
	if err != nil {
		tb.Fatal(err)
	}
	s, err := NewScheme(reg)
	if err != nil {
		tb.Fatal(err)
	}
	return s
}

// BenchmarkLocate3D locates 10 million uniformly random points (about 2%
// of them in flow bins) in a 100x100x50 grid per iteration and reports the
// rate in points per second on one core.
func BenchmarkLocate3D(b *testing.B) {
	s := grid3D(b)
	const n = 10_000_000
	rng := rand.New(rand.NewPCG(1, 2))
	pts := make([]float64, 3*n)
	for i := range pts {
		pts[i] = rng.Float64()*1.02 - 0.01
	}
	b.ResetTimer()
	sum := 0
	for b.Loop() {
		for i := 0; i < n; i++ {
			sum += s.Locate(pts[3*i : 3*i+3 : 3*i+3])
		}
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "points/s")
	if sum == 0 {
		b.Fatal("no point located")
	}
}

// BenchmarkLocateByBin locates 1 million random points in a 2-D region of
// 100 rapidity slices, each with its own 100 irregular pt bins.
func BenchmarkLocateByBin(b *testing.B) {
	rng := rand.New(rand.NewPCG(3, 4))
	by := make([][]float64, 100)
	for i := range by {
		by[i] = randomEdges(rng, 100, 0)
	}
	y, _ := NewAxis("y", "", uniformEdges(100, 0, 1), false, true)
	pt, err := NewAxisByBin("pt", "", by, true, true)
	if err != nil {
		b.Fatal(err)
	}
	reg, err := NewRegion("r", y, pt)
	if err != nil {
		b.Fatal(err)
	}
	s, err := NewScheme(reg)
	if err != nil {
		b.Fatal(err)
	}
	const n = 1_000_000
	pts := make([]float64, 2*n)
	for i := 0; i < n; i++ {
		pts[2*i] = rng.Float64() * 1.01
		pts[2*i+1] = rng.Float64() * 40
	}
	sum := 0
	for b.Loop() {
		for i := 0; i < n; i++ {
			sum += s.Locate(pts[2*i : 2*i+2 : 2*i+2])
		}
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "points/s")
	if sum == 0 {
		b.Fatal("no point located")
	}
}

// BenchmarkLocate3DBaseline is the plain approach for comparison: a
// branch-free binary search on each axis of the same grid and row-major
// arithmetic, flow bins not resolved. Run it beside BenchmarkLocate3D; the
// ratio of the two survives a noisy host better than either figure.
func BenchmarkLocate3DBaseline(b *testing.B) {
	e1, e2, e3 := uniformEdges(100, 0, 1), uniformEdges(100, 0, 1), uniformEdges(50, 0, 1)
	const n = 10_000_000
	rng := rand.New(rand.NewPCG(1, 2))
	pts := make([]float64, 3*n)
	for i := range pts {
		pts[i] = rng.Float64()*1.02 - 0.01
	}
	sum := 0
	for b.Loop() {
		for i := 0; i < n; i++ {
			x := pts[3*i : 3*i+3 : 3*i+3]
			i1, i2, i3 := search(e1, x[0]), search(e2, x[1]), search(e3, x[2])
			if uint(i1) >= 100 || uint(i2) >= 100 || uint(i3) >= 50 {
				sum--
				continue
			}
			sum += (i1*100+i2)*50 + i3
		}
	}
	b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "points/s")
	if sum == 0 {
		b.Fatal("no point located")
	}
}

// BenchmarkEachLabel formats the labels of every bin of the 100x100x50
// grid with flows (530,400 bins) per iteration, as a fingerprint of the
// binning does.
func BenchmarkEachLabel(b *testing.B) {
	s := grid3D(b)
	n := 0
	for b.Loop() {
		s.EachLabel(func(g int, label []byte) { n += len(label) })
	}
	b.ReportMetric(float64(s.Len())*float64(b.N)/b.Elapsed().Seconds(), "bins/s")
}
