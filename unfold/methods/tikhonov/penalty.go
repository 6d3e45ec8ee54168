package tikhonov

import (
	"fmt"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// penalty is the regularisation matrix L: one row per difference, each
// with two (slope) or three (curvature) entries, stored row after row.
type penalty struct {
	width int       // entries per row: 2 or 3
	idx   []int     // len = rows·width: the truth bins of each row
	coef  []float64 // the coefficients beside idx
}

// rows returns the number of rows of L.
func (l *penalty) rows() int { return len(l.idx) / l.width }

// apply sets dst (one entry per row) to L x.
func (l *penalty) apply(dst, x []float64) {
	w := l.width
	for r := range dst {
		var s float64
		for k := r * w; k < (r+1)*w; k++ {
			s += l.coef[k] * x[l.idx[k]]
		}
		dst[r] = s
	}
}

// addNormal adds t·Lᵀ L x to dst (truth-sized), with lx (one entry per
// row) as scratch. dst must not alias x. The rows are added in order, so
// the sum does not depend on anything but L.
func (l *penalty) addNormal(dst, x, lx []float64, t float64) {
	l.apply(lx, x)
	w := l.width
	for r, v := range lx {
		v *= t
		for k := r * w; k < (r+1)*w; k++ {
			dst[l.idx[k]] += l.coef[k] * v
		}
	}
}

// addDiagonal adds t·diag(Lᵀ L) to dst.
func (l *penalty) addDiagonal(dst []float64, t float64) {
	for k, j := range l.idx {
		dst[j] += t * l.coef[k] * l.coef[k]
	}
}

// norm2 returns |L x|², summed in row order, with lx as scratch.
func (l *penalty) norm2(x, lx []float64) float64 {
	l.apply(lx, x)
	var s float64
	for _, v := range lx {
		s += v * v
	}
	return s
}

// newPenalty builds L for the truth bins of a problem with nt bins,
// determined where det is set (method.md §13 Tikhonov regularisation):
//
//   - Without a scheme, one axis along the global index: rows for every
//     run of consecutive determined bins.
//   - With a scheme, along each axis of each region, inside the region,
//     for in-range bins only (Scheme.Neighbours): flow bins and
//     undetermined bins carry no rows and are no neighbours. Along an
//     axis on which the next axis has edges by bin the slices are not
//     consecutive bins, and that axis carries no rows.
//
// Curvature rows are x_prev − 2 x_j + x_next; slope rows x_next − x_j.
// With widths the rows act on densities x_j/V_j (V_j the bin volume)
// and divide by the distances of the bin centres along the axis:
// slope (d_next − d_j)/h₊, curvature 2/(h₋+h₊) [(d_next − d_j)/h₊ −
// (d_j − d_prev)/h₋], so that the row vanishes on a density linear in
// the variable.
func newPenalty(s *binning.Scheme, nt int, det []bool, kind Penalty, widths bool) (*penalty, error) {
	l := &penalty{width: 3}
	if kind == Slope {
		l.width = 2
	}
	add := func(idx []int, coef []float64) {
		for _, j := range idx {
			if !det[j] {
				return
			}
		}
		l.idx = append(l.idx, idx...)
		l.coef = append(l.coef, coef...)
	}
	if s == nil {
		for j := 0; j < nt; j++ {
			switch {
			case kind == Slope && j+1 < nt:
				add([]int{j, j + 1}, []float64{-1, 1})
			case kind == Curvature && j > 0 && j+1 < nt:
				add([]int{j - 1, j, j + 1}, []float64{1, -2, 1})
			}
		}
		return l, nil
	}
	if s.Len() != nt {
		return nil, &unfold.SettingsError{Field: "Truth", Reason: fmt.Sprintf("the truth binning has %d bins, the response %d truth bins", s.Len(), nt)}
	}
	// centre returns the centre of bin g along axis a and its volume.
	centre := func(g, a int) (float64, float64) {
		b := s.Bin(g)
		return (b.Low[a] + b.High[a]) / 2, b.Volume
	}
	regions := s.Regions()
	for g := 0; g < s.InRange(); g++ {
		axes := regions[s.RegionOf(g)].Axes()
		for a := range axes {
			if a+1 < len(axes) && axes[a+1].ByBin() {
				continue // the slices of the next axis are not consecutive bins
			}
			prev, next := s.Neighbours(g, a)
			switch {
			case kind == Slope && next >= 0:
				if !widths {
					add([]int{g, next}, []float64{-1, 1})
					continue
				}
				c0, v0 := centre(g, a)
				c1, v1 := centre(next, a)
				h := c1 - c0
				add([]int{g, next}, []float64{-1 / (h * v0), 1 / (h * v1)})
			case kind == Curvature && prev >= 0 && next >= 0:
				if !widths {
					add([]int{prev, g, next}, []float64{1, -2, 1})
					continue
				}
				cm, vm := centre(prev, a)
				c0, v0 := centre(g, a)
				cp, vp := centre(next, a)
				hm, hp := c0-cm, cp-c0
				f := 2 / (hm + hp)
				add([]int{prev, g, next}, []float64{f / (hm * vm), -f * (1/hm + 1/hp) / v0, f / (hp * vp)})
			}
		}
	}
	return l, nil
}
