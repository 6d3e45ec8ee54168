package bayes

import (
	"context"
	"runtime"
	"slices"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
	"gonum.org/v1/gonum/floats"
)

// jacobian carries the dense Jacobian J(k) = dμ(k)/d(n, b) along the
// iteration. Its columns are the data bins 0..nr-1 and, when the
// background variance is propagated in the model, the background bins
// nr..2nr-1. The recursion (see the package documentation) is
//
//	J(k+1) = diag(g/eps) J(k) + diag(μ/eps) [S − Rᵀ diag(n/ν²) R J(k)],
//
// with S = [Rᵀ diag(1/ν) | −Rᵀ diag(n/ν²)], and J(0) = p/Σ(eps p) [1ᵀ | −1ᵀ].
type jacobian struct {
	m    *model
	dst  *unfold.Jacobian
	k    int // the iteration the buffers hold
	cols int
	j, w []float64 // two row-major nt×cols buffers

	// structure of A = Rᵀ diag(n/ν²) R (symmetric, nt×nt, CSR)
	aPtr []int
	aIdx []int32
	aVal []float64
	loc  []int32 // scratch: position of column l in the current row, -1 otherwise

	cVal []float64 // values of R in the order of A's entries

	// rows of R: for reco bin i, the truth bins and values
	rPtr []int
	rCol []int32
	rVal []float64

	// The covariance carried along (dst.ColumnVariances set, no
	// smoothing): V(k) = J(k) D J(k)ᵀ with D = diag(cv), in v; t is a
	// second nt×nt buffer, nil when the Jacobian's work buffer w (used
	// before J(k+1) is written into it) is large enough; ra, rb, rw are
	// per-reco-bin factors.
	cv         []float64
	v, t       []float64
	ra, rb, rw []float64
}

const jacobianBlock = 512 // columns per block of the dense update

// newJacobian prepares the recursion for m in the buffers of dst.
func newJacobian(m *model, dst *unfold.Jacobian) *jacobian {
	nt, nr := m.nt, m.nr
	jc := &jacobian{m: m, dst: dst, cols: dst.Cols, j: dst.Data, w: dst.Work}

	// Rows of R.
	jc.cVal = m.rValues()
	colPtr, rowIdx, val := m.a.ColPtr(), m.a.RowIdx(), jc.cVal
	jc.rPtr = make([]int, nr+1)
	for _, i := range rowIdx {
		jc.rPtr[i+1]++
	}
	for i := 0; i < nr; i++ {
		jc.rPtr[i+1] += jc.rPtr[i]
	}
	jc.rCol = make([]int32, len(rowIdx))
	jc.rVal = make([]float64, len(rowIdx))
	fill := append([]int(nil), jc.rPtr[:nr]...)
	for c := 0; c < nt; c++ {
		for k := colPtr[c]; k < colPtr[c+1]; k++ {
			i := rowIdx[k]
			jc.rCol[fill[i]] = int32(c)
			jc.rVal[fill[i]] = val[k]
			fill[i]++
		}
	}

	// Pattern of A: l is in row j when columns j and l share a row of R.
	jc.loc = make([]int32, nt)
	for i := range jc.loc {
		jc.loc[i] = -1
	}
	jc.aPtr = make([]int, nt+1)
	var row []int32
	for c := 0; c < nt; c++ {
		row = row[:0]
		for k := colPtr[c]; k < colPtr[c+1]; k++ {
			i := rowIdx[k]
			for q := jc.rPtr[i]; q < jc.rPtr[i+1]; q++ {
				l := jc.rCol[q]
				if jc.loc[l] < 0 {
					jc.loc[l] = 0
					row = append(row, l)
				}
			}
		}
		slices.Sort(row)
		for _, l := range row {
			jc.loc[l] = -1
		}
		jc.aIdx = append(jc.aIdx, row...)
		jc.aPtr[c+1] = len(jc.aIdx)
	}
	jc.aVal = make([]float64, len(jc.aIdx))
	return jc
}

func (jc *jacobian) init(ctx context.Context, it *iterator) error {
	m := jc.m
	for r := 0; r < m.nt; r++ {
		c := m.prior[r] / m.sumEP
		row := jc.j[r*jc.cols : (r+1)*jc.cols]
		for q := 0; q < m.nr; q++ {
			row[q] = c
		}
		for q := m.nr; q < jc.cols; q++ {
			row[q] = -c
		}
	}
	jc.k = 0
	if cv := jc.dst.ColumnVariances; cv != nil && it.sm == nil {
		nt := m.nt
		if len(jc.v) != nt*nt {
			jc.v = make([]float64, nt*nt)
			if jc.cols < nt {
				jc.t = make([]float64, nt*nt)
			}
			jc.ra, jc.rb, jc.rw = make([]float64, m.nr), make([]float64, m.nr), make([]float64, m.nr)
		}
		jc.cv = cv
		// V(0) = J(0) D J(0)ᵀ: c_r c_s Σ_q v_q, c = p/Σ(eps p).
		var sv float64
		for _, x := range cv {
			sv += x
		}
		parallel.For(nt, runtime.GOMAXPROCS(0), func(r int) {
			cr := m.prior[r] / m.sumEP
			row := jc.v[r*nt : (r+1)*nt]
			for s := range row {
				row[s] = cr * (m.prior[s] / m.sumEP) * sv
			}
		})
	}
	jc.report()
	return nil
}

// carry advances the covariance from V(k) = J(k) D J(k)ᵀ to V(k+1) for
// the recursion J(k+1) = M J(k) + N (method.md §8 Linearised
// uncertainty propagation: M = diag(g/eps) − diag(μ/eps) A, N =
// diag(μ/eps) S) without the dense product of J(k+1) with itself:
//
//	V(k+1) = X + Xᵀ + N D Nᵀ,  X = M (½ (M V(k))ᵀ + E),  E = J(k) D Nᵀ,
//
// since X + Xᵀ = M V Mᵀ + M E + Eᵀ Mᵀ (V symmetric). M V and M T are
// sparse-times-dense products in column blocks (mulM), E gathers the few
// reco bins of each truth bin from the rows of J(k), and N D Nᵀ has the
// pattern of A. Every element is summed in a fixed order, whatever the
// number of cores.
func (jc *jacobian) carry(ctx context.Context, it *iterator) error {
	m := jc.m
	nt, nr, cols := m.nt, m.nr, jc.cols
	n, nu, mu := it.n, it.nu, it.mu
	colPtr, rowIdx, val := m.a.ColPtr(), m.a.RowIdx(), jc.cVal
	cv := jc.cv
	for i := range nr {
		jc.ra[i], jc.rb[i], jc.rw[i] = 0, 0, 0
		if nu[i] <= 0 {
			continue
		}
		jc.ra[i] = cv[i] / nu[i]
		jc.rw[i] = cv[i] / (nu[i] * nu[i])
		if cols > nr {
			q := n[i] / (nu[i] * nu[i])
			jc.rb[i] = -cv[nr+i] * q
			jc.rw[i] += cv[nr+i] * q * q
		}
	}
	h := func(r int) float64 {
		if !m.det[r] || mu[r] == 0 {
			return 0
		}
		return mu[r] * m.invEps[r]
	}
	V, T, J := jc.v, jc.t, jc.j
	if T == nil {
		// J(k+1) overwrites w only after the carry: its first n_t²
		// elements are the work matrix (cols ≥ n_t).
		T = jc.w[:nt*nt]
	}
	procs := runtime.GOMAXPROCS(0)
	jc.mulM(ctx, T, V, nt, it, nil)       // T = M V
	parallel.For(nt, procs, func(r int) { // T ← Tᵀ
		for s := r + 1; s < nt; s++ {
			T[r*nt+s], T[s*nt+r] = T[s*nt+r], T[r*nt+s]
		}
	})
	parallel.For(nt, procs, func(r int) { // T ← ½ T + E
		jr := J[r*cols : (r+1)*cols]
		row := T[r*nt : (r+1)*nt]
		for s := range row {
			var e float64
			if hs := h(s); hs != 0 {
				for k := colPtr[s]; k < colPtr[s+1]; k++ {
					i := rowIdx[k]
					x := jr[i] * jc.ra[i]
					if cols > nr {
						x += jr[nr+i] * jc.rb[i]
					}
					e += val[k] * x
				}
				e *= hs
			}
			row[s] = 0.5*row[s] + e
		}
	})
	if err := ctx.Err(); err != nil {
		return err
	}
	jc.mulM(ctx, V, T, nt, it, nil)       // V = X = M T
	parallel.For(nt, procs, func(r int) { // V ← X + Xᵀ
		V[r*nt+r] *= 2
		for s := r + 1; s < nt; s++ {
			x := V[r*nt+s] + V[s*nt+r]
			V[r*nt+s], V[s*nt+r] = x, x
		}
	})
	parallel.For(nt, procs, func(r int) { // V += N D Nᵀ
		hr := h(r)
		if hr == 0 {
			return
		}
		row := V[r*nt : (r+1)*nt]
		for k := colPtr[r]; k < colPtr[r+1]; k++ {
			i := rowIdx[k]
			if nu[i] <= 0 {
				continue
			}
			w := hr * val[k] * jc.rw[i]
			for q := jc.rPtr[i]; q < jc.rPtr[i+1]; q++ {
				s := int(jc.rCol[q])
				row[s] += w * h(s) * jc.rVal[q]
			}
		}
	})
	return ctx.Err()
}

// report hands the Jacobian of iteration jc.k to the driver
// (unfold.Jacobian.Step).
func (jc *jacobian) report() {
	jc.dst.Data, jc.dst.Work = jc.j, jc.w
	jc.dst.Step(jc.k)
}

// values computes A = Rᵀ diag(n/ν²) R for the current ν.
func (jc *jacobian) values(n, nu []float64) {
	m := jc.m
	colPtr, rowIdx, val := m.a.ColPtr(), m.a.RowIdx(), jc.cVal
	for c := 0; c < m.nt; c++ {
		lo, hi := jc.aPtr[c], jc.aPtr[c+1]
		for q := lo; q < hi; q++ {
			jc.loc[jc.aIdx[q]] = int32(q)
			jc.aVal[q] = 0
		}
		for k := colPtr[c]; k < colPtr[c+1]; k++ {
			i := rowIdx[k]
			if nu[i] <= 0 {
				continue
			}
			w := val[k] * n[i] / (nu[i] * nu[i])
			for q := jc.rPtr[i]; q < jc.rPtr[i+1]; q++ {
				jc.aVal[jc.loc[jc.rCol[q]]] += w * jc.rVal[q]
			}
		}
		for q := lo; q < hi; q++ {
			jc.loc[jc.aIdx[q]] = -1
		}
	}
}

func (jc *jacobian) step(ctx context.Context, it *iterator) error {
	m := jc.m
	jc.values(it.n, it.nu)
	if jc.v != nil {
		// V(k+1) from V(k) and J(k), before J(k+1) overwrites W.
		if err := jc.carry(ctx, it); err != nil {
			return err
		}
	}
	J, W := jc.j, jc.w
	colPtr, rowIdx, val := m.a.ColPtr(), m.a.RowIdx(), jc.cVal
	n, nu, mu := it.n, it.nu, it.mu
	cols := jc.cols
	jc.mulM(ctx, W, J, cols, it, func(r, c0, c1 int, dst []float64) {
		h := mu[r] * m.invEps[r]
		for k := colPtr[r]; k < colPtr[r+1]; k++ {
			i := rowIdx[k]
			if nu[i] <= 0 {
				continue
			}
			if i >= c0 && i < c1 {
				dst[i-c0] += h * val[k] / nu[i]
			}
			if ib := i + m.nr; cols > m.nr && ib >= c0 && ib < c1 {
				dst[ib-c0] -= h * val[k] * n[i] / (nu[i] * nu[i])
			}
		}
	})
	if err := ctx.Err(); err != nil {
		return err
	}
	if it.sm != nil {
		// M ← (1−w) M + w S M on the rows of W.
		W, J = it.sm.applyRows(J, W, cols)
	}
	jc.j, jc.w = W, J
	jc.k++
	jc.report()
	return nil
}

// mulM sets dst = M src for the row-major nt×cols matrix src, with M =
// diag(g/eps) − diag(μ/eps) A the linear part of the recursion (rows of
// bins not determined, or with μ = 0, are zero), in column blocks of
// jacobianBlock run in parallel. add, when not nil, is called for every
// row r of every block [c0, c1) after the product, with the block of the
// row, to add the inhomogeneous part. dst must not alias src. Each
// element is summed in the same order whatever the number of cores.
func (jc *jacobian) mulM(ctx context.Context, dst, src []float64, cols int, it *iterator, add func(r, c0, c1 int, dst []float64)) {
	m := jc.m
	nb := (cols + jacobianBlock - 1) / jacobianBlock
	mu, g, inv := it.mu, it.g, m.invEps
	parallel.For(nb, runtime.GOMAXPROCS(0), func(b int) {
		if ctx.Err() != nil {
			return
		}
		c0 := b * jacobianBlock
		c1 := min(cols, c0+jacobianBlock)
		for r := 0; r < m.nt; r++ {
			d := dst[r*cols+c0 : r*cols+c1]
			if !m.det[r] || mu[r] == 0 {
				clear(d)
				continue
			}
			f := g[r] * inv[r]
			s := src[r*cols+c0 : r*cols+c1]
			for q := range d {
				d[q] = f * s[q]
			}
			h := mu[r] * inv[r]
			for q := jc.aPtr[r]; q < jc.aPtr[r+1]; q++ {
				l := int(jc.aIdx[q])
				floats.AddScaled(d, -h*jc.aVal[q], src[l*cols+c0:l*cols+c1])
			}
			if add != nil {
				add(r, c0, c1, d)
			}
		}
	})
}
