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
	jc.report()
	return nil
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
	nb := (jc.cols + jacobianBlock - 1) / jacobianBlock
	J, W := jc.j, jc.w
	colPtr, rowIdx, val := m.a.ColPtr(), m.a.RowIdx(), jc.cVal
	n, nu, mu, g, inv := it.n, it.nu, it.mu, it.g, m.invEps
	cols := jc.cols
	parallel.For(nb, runtime.GOMAXPROCS(0), func(b int) {
		if ctx.Err() != nil {
			return
		}
		c0 := b * jacobianBlock
		c1 := min(cols, c0+jacobianBlock)
		for r := 0; r < m.nt; r++ {
			dst := W[r*cols+c0 : r*cols+c1]
			if !m.det[r] || mu[r] == 0 {
				clear(dst)
				continue
			}
			f := g[r] * inv[r]
			src := J[r*cols+c0 : r*cols+c1]
			for q := range dst {
				dst[q] = f * src[q]
			}
			h := mu[r] * inv[r]
			for q := jc.aPtr[r]; q < jc.aPtr[r+1]; q++ {
				l := int(jc.aIdx[q])
				floats.AddScaled(dst, -h*jc.aVal[q], J[l*cols+c0:l*cols+c1])
			}
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
