package bayes

import (
	"math"
	"runtime"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
	"gonum.org/v1/gonum/floats"
)

// MaxAxes is the largest number of axes a truth region may have for
// smoothing (that of package binning).
const MaxAxes = binning.MaxAxes

// Neighbourhood describes the neighbours of truth bins along the axes of
// their regions. *binning.Scheme satisfies it.
//
// Len is the number of truth bins. Bins 0..InRange()-1 are in-range
// bins; bins from InRange() on are flow bins and are never smoothed.
// Neighbours returns the global indices of the previous and next bin of
// g along axis of g's region, or -1 where there is none (at the edge of
// the region and for flow bins). Regions are never neighbours of each
// other.
//
// Smoothing asks Neighbours only about the axes g's region has when the
// implementation reports them with a method NumAxes(g int) int, as
// *binning.Scheme does; otherwise it must answer (-1, -1) for every axis
// up to MaxAxes that g's region lacks.
type Neighbourhood interface {
	Len() int
	InRange() int
	Neighbours(g, axis int) (prev, next int)
}

// numAxes returns a function giving the number of axes of bin g's
// region, for in-range bins.
func numAxes(nb Neighbourhood) func(g int) int {
	if s, ok := nb.(interface{ NumAxes(g int) int }); ok {
		return s.NumAxes
	}
	return func(int) int { return MaxAxes }
}

// Smoothing smooths the estimate after every iteration, before it is
// used as the prior of the next one, as in the EMS algorithm of
// B. W. Silverman, M. C. Jones, J. D. Wilson, D. W. Nychka, JRSS B 52
// (1990) 271 (an EM step followed by a linear smoothing step).
//
// The smoothing is the binomial (1,2,1)/4 kernel applied along each axis
// in turn, in mass-conserving form: every in-range, determined truth bin
// keeps 1/2 of its content and gives 1/4 to each neighbour along the
// axis; where a neighbour is missing (edge of the region, flow bin, bin
// not determined) the bin keeps that quarter. Along a uniform axis with
// reflecting ends this is the (1,2,1)/4 filter; it preserves the total
// Σ_j μ_j exactly (up to rounding) and never moves content across
// regions or into flow bins. Strength w blends the result with the
// unsmoothed estimate, μ ← (1−w) μ + w S μ.
type Smoothing struct {
	// Neighbours gives the truth-bin neighbourhood (required).
	Neighbours Neighbourhood
	// Strength is w in (0, 1]; zero means 1.
	Strength float64
}

func (s *Smoothing) check() error {
	switch {
	case s.Neighbours == nil:
		return &unfold.SettingsError{Field: "Smoothing", Reason: "no neighbourhood given"}
	case s.Strength < 0 || s.Strength > 1 || math.IsNaN(s.Strength):
		return &unfold.SettingsError{Field: "Smoothing", Reason: "must be a strength in (0, 1]"}
	case s.Neighbours.InRange() < 0 || s.Neighbours.InRange() > s.Neighbours.Len():
		return &unfold.SettingsError{Field: "Smoothing", Reason: "neighbourhood reports more in-range bins than bins"}
	}
	return nil
}

// smoother is the smoothing operator bound to a problem: for every
// in-range determined bin and axis, the neighbours that take part.
type smoother struct {
	n   int
	w   float64
	nbr [][][2]int32 // nbr[axis][j] = (prev, next), -1 when absent
}

func newSmoother(s *Smoothing, det []bool) (*smoother, error) {
	nb := s.Neighbours
	if nb.Len() != len(det) {
		return nil, &unfold.SettingsError{Field: "Smoothing", Reason: "neighbourhood has a different number of bins than the truth binning"}
	}
	in := nb.InRange()
	sm := &smoother{n: len(det), w: s.Strength}
	if sm.w == 0 {
		sm.w = 1
	}
	ok := func(g int) bool { return g >= 0 && g < in && det[g] }
	axes := numAxes(nb)
	dims := make([]int8, in)
	for j := range dims {
		dims[j] = int8(axes(j))
	}
	maxDim := 0
	for _, d := range dims {
		maxDim = max(maxDim, int(d))
	}
	for a := 0; a < maxDim; a++ {
		t := make([][2]int32, len(det))
		for j := range t {
			t[j] = [2]int32{-1, -1}
			if !ok(j) || a >= int(dims[j]) {
				continue
			}
			p, q := nb.Neighbours(j, a)
			if p >= len(det) || q >= len(det) {
				return nil, &unfold.SettingsError{Field: "Smoothing", Reason: "neighbourhood returned a bin beyond its length"}
			}
			if ok(p) {
				t[j][0] = int32(p)
			}
			if ok(q) {
				t[j][1] = int32(q)
			}
		}
		sm.nbr = append(sm.nbr, t)
	}
	return sm, nil
}

// apply smooths x in place, x ← (1−w) x + w S x with S the product of
// the per-axis kernels; tmp and orig have the length of x (orig is used
// only for w < 1). It is linear in x, so the same call smooths tangent
// vectors.
func (sm *smoother) apply(x, tmp, orig []float64) {
	if sm.w == 1 {
		sm.kernels(x, tmp)
		return
	}
	copy(orig, x)
	sm.kernels(x, tmp)
	for j, v := range orig {
		x[j] = (1-sm.w)*v + sm.w*x[j]
	}
}

// kernels sets x ← S x, applying the per-axis kernels in turn; tmp has
// the length of x.
func (sm *smoother) kernels(x, tmp []float64) {
	for _, t := range sm.nbr {
		copy(tmp, x)
		for j := range x {
			x[j] *= 0.5
		}
		for j, pq := range t {
			c := tmp[j] / 4
			for _, g := range pq {
				if g >= 0 {
					x[g] += c
				} else {
					x[j] += c
				}
			}
		}
	}
}

// applyRows smooths the rows of the row-major n×m matrix src into dst,
// dst ← (1−w) src + w S src (the Jacobian's columns are tangent vectors,
// so its rows combine as the entries of x in apply). src is overwritten;
// dst and src must not overlap. It returns dst and src, which may have
// been swapped: the smoothed rows are in the first.
func (sm *smoother) applyRows(dst, src []float64, m int) (out, spare []float64) {
	if sm.w == 1 {
		// Ping-pong the kernels between the two buffers.
		for a := range sm.nbr {
			sm.kernelRows(dst, src, m, a)
			dst, src = src, dst
		}
		return src, dst
	}
	// Column blocks are independent: each is copied out, smoothed
	// through two scratch blocks and blended into dst.
	n := len(src) / max(m, 1)
	nb := (m + smoothBlock - 1) / smoothBlock
	parallel.For(nb, runtime.GOMAXPROCS(0), func(b int) {
		c0 := b * smoothBlock
		c1 := min(m, c0+smoothBlock)
		bw := c1 - c0
		x, t := make([]float64, n*bw), make([]float64, n*bw)
		for r := 0; r < n; r++ {
			copy(x[r*bw:(r+1)*bw], src[r*m+c0:r*m+c1])
		}
		for a := range sm.nbr {
			sm.kernelRows(t, x, bw, a)
			x, t = t, x
		}
		for r := 0; r < n; r++ {
			d, s, k := dst[r*m+c0:r*m+c1], src[r*m+c0:r*m+c1], x[r*bw:(r+1)*bw]
			for q := range d {
				d[q] = (1-sm.w)*s[q] + sm.w*k[q]
			}
		}
	})
	return dst, src
}

// smoothBlock is the column block of applyRows with w < 1.
const smoothBlock = 64

// kernelRows writes into dst the kernel along axis a applied to the rows
// of the row-major n×m matrix src. dst and src must not overlap.
func (sm *smoother) kernelRows(dst, src []float64, m, a int) {
	t := sm.nbr[a]
	for i, v := range src {
		dst[i] = 0.5 * v
	}
	for j, pq := range t {
		s := src[j*m : (j+1)*m]
		for _, g := range pq {
			d := j
			if g >= 0 {
				d = int(g)
			}
			floats.AddScaled(dst[d*m:(d+1)*m], 0.25, s)
		}
	}
}
