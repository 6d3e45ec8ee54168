package bayes

import (
	"math"
	"slices"
	"testing"

	"github.com/desmear/desmear/binning"
)

// chainScheme is a one-region, one-axis truth binning of n bins without
// flows.
func chainScheme(t testing.TB, n int) *binning.Scheme { return gridScheme(t, n) }

// gridScheme is a one-region truth binning without flows with one axis
// of n bins per entry of sizes.
func gridScheme(t testing.TB, sizes ...int) *binning.Scheme {
	t.Helper()
	var axes []*binning.Axis
	for k, n := range sizes {
		edges := make([]float64, n+1)
		for i := range edges {
			edges[i] = float64(i)
		}
		ax, err := binning.NewAxis(string(rune('x'+k)), "", edges, false, false)
		if err != nil {
			t.Fatal(err)
		}
		axes = append(axes, ax)
	}
	reg, err := binning.NewRegion("all", axes...)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(reg)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// The smoothing is the binomial (1,2,1)/4 filter along each axis with
// reflecting ends (common practice for a total-preserving smoother; the
// EMS scheme of Silverman et al., JRSS B 52 (1990) 271, smooths after
// each EM step): checked by hand on a 2-D region (3×4 bins, flows on) and
// a second 1-D region; the total is preserved, nothing moves into flow
// bins or across regions.
func TestSmoothingKernel(t *testing.T) {
	x, _ := binning.NewAxis("x", "", []float64{0, 1, 2, 3}, true, true)
	y, _ := binning.NewAxis("y", "", []float64{0, 1, 2, 3, 4}, false, false)
	z, _ := binning.NewAxis("z", "", []float64{0, 1, 2}, false, true)
	r1, err := binning.NewRegion("a", x, y)
	if err != nil {
		t.Fatal(err)
	}
	r2, err := binning.NewRegion("b", z)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(r1, r2)
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len()
	det := make([]bool, n)
	for i := range det {
		det[i] = true
	}
	sm, err := newSmoother(&Smoothing{Neighbours: s}, det)
	if err != nil {
		t.Fatal(err)
	}
	v := make([]float64, n)
	for i := range v {
		v[i] = float64(1 + i*i%7)
	}
	orig := append([]float64(nil), v...)
	sm.apply(v, make([]float64, n), make([]float64, n))

	// Reference: (1,2,1)/4 with reflecting ends along y then x on the
	// 3×4 grid of region a (row-major, y fastest), separately on region b.
	lo, hi := s.Span(0)
	grid := make([][]float64, 3)
	for i := range grid {
		grid[i] = append([]float64(nil), orig[lo+4*i:lo+4*i+4]...)
	}
	smooth1 := func(a []float64) []float64 {
		out := make([]float64, len(a))
		for i := range a {
			l, r := i-1, i+1
			if l < 0 {
				l = i
			}
			if r >= len(a) {
				r = i
			}
			out[i] = (a[l] + 2*a[i] + a[r]) / 4
		}
		return out
	}
	// axis 0 is x (the slow index): smooth along x first, then y.
	for c := 0; c < 4; c++ {
		col := []float64{grid[0][c], grid[1][c], grid[2][c]}
		col = smooth1(col)
		for i := range col {
			grid[i][c] = col[i]
		}
	}
	for i := range grid {
		grid[i] = smooth1(grid[i])
	}
	for i := 0; i < 3; i++ {
		for c := 0; c < 4; c++ {
			if got := v[lo+4*i+c]; math.Abs(got-grid[i][c]) > 1e-12 {
				t.Errorf("region a bin (%d,%d): got %g, want %g", i, c, got, grid[i][c])
			}
		}
	}
	if hi-lo != 12 {
		t.Fatalf("region a has %d in-range bins", hi-lo)
	}
	lo2, hi2 := s.Span(1)
	want2 := smooth1(orig[lo2:hi2])
	for i := range want2 {
		if math.Abs(v[lo2+i]-want2[i]) > 1e-12 {
			t.Errorf("region b bin %d: got %g, want %g", i, v[lo2+i], want2[i])
		}
	}
	var s0, s1 float64
	for i := range v {
		s0 += orig[i]
		s1 += v[i]
		if i >= s.InRange() && v[i] != orig[i] {
			t.Errorf("flow bin %d changed: %g → %g", i, orig[i], v[i])
		}
	}
	if !near(s0, s1, 1e-14) {
		t.Errorf("total %g → %g", s0, s1)
	}
}

// Unfolding with smoothing preserves Σ eps μ = Σ n only without
// smoothing, but the smoothing step itself preserves Σ μ: checked on the
// last step of an unfolding of a random problem, against the unsmoothed
// EM step from the same prior.
func TestSmoothingPreservesTotal(t *testing.T) {
	p := randomProblem(t, 2, 30, 60, 6, false)
	sch := chainScheme(t, 30)
	m := mustModel(t, p)
	sm, err := newSmoother(&Smoothing{Neighbours: sch}, m.det)
	if err != nil {
		t.Fatal(err)
	}
	a := newIterator(m, nil)
	b := newIterator(m, sm)
	a.start(m.n)
	b.start(m.n)
	a.emStep()
	b.emStep()
	var sa, sb float64
	for j := range a.next {
		sa += a.next[j]
		sb += b.next[j]
	}
	if !near(sa, sb, 1e-14) {
		t.Errorf("Σ μ: unsmoothed %.15g, smoothed %.15g", sa, sb)
	}
	if maxRelDiff(a.next, b.next) < 1e-6 {
		t.Errorf("smoothing did not change the estimate")
	}
}

// A strength W < 1 blends the full smoothing once, μ ← (1−W) μ + W S μ
// with S the product of the per-axis kernels (the package documentation,
// section Smoothing), not once per axis. Closed form, derived here, on a
// 2×2 region without flows and a unit mass 4 in the corner bin 0: along
// an axis of two bins each bin keeps 3/4 and gives 1/4 to its neighbour
// (1/2 kept, 1/4 to the neighbour, the missing side's 1/4 kept), so
//
//	S δ = (9/4, 3/4, 3/4, 1/4) for bins (0, two edge neighbours, 3),
//
// and with W = 1/2, μ = δ/2 + S δ/2 = (25/8, 3/8, 3/8, 1/8). Blending per
// axis would instead give (49/16, 7/16, 7/16, 1/16). All values are
// binary fractions, so the check is exact.
func TestSmoothingStrengthBlendsOnce(t *testing.T) {
	s := gridScheme(t, 2, 2)
	sm, err := newSmoother(&Smoothing{Neighbours: s, Strength: 0.5}, []bool{true, true, true, true})
	if err != nil {
		t.Fatal(err)
	}
	v := []float64{4, 0, 0, 0}
	sm.apply(v, make([]float64, 4), make([]float64, 4))
	if want := []float64{25.0 / 8, 3.0 / 8, 3.0 / 8, 1.0 / 8}; !slices.Equal(v, want) {
		t.Errorf("smoothed %v, want %v", v, want)
	}
	// The rows of a matrix (the Jacobian's update) follow the same
	// formula, column by column.
	src := []float64{4, 1, 0, 0, 0, 0, 0, 0}
	dst := make([]float64, 8)
	out, _ := sm.applyRows(dst, src, 2)
	if want := []float64{25.0 / 8, 1 * 25.0 / 32, 3.0 / 8, 3.0 / 32, 3.0 / 8, 3.0 / 32, 1.0 / 8, 1.0 / 32}; !slices.Equal(out, want) {
		t.Errorf("smoothed rows %v, want %v", out, want)
	}
}
