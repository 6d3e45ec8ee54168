package unfold

import (
	"context"
	"runtime"

	"github.com/desmear/desmear/unfold/internal/parallel"
	"gonum.org/v1/gonum/mat"
)

// Jacobian is the dense Jacobian J = dμ/d(n, b) of an estimate, filled by
// Fit.Jacobian. Its rows are the truth bins, its columns the data bins
// 0..RecoBins-1 and, when the background variance is propagated, the
// background bins RecoBins..2·RecoBins-1 (Prepared.Columns).
type Jacobian struct {
	Rows, Cols int
	// Data holds J row-major, Rows×Cols.
	Data []float64
	// Work is a second buffer of the same size that a method may use as
	// scratch (and swap with Data); on return from Fit.Jacobian the
	// Jacobian is in Data.
	Work []float64

	// ColumnVariances, when the driver sets them before Fit.Jacobian,
	// are the variances of the columns, and the driver wants the
	// covariance J diag(ColumnVariances) Jᵀ. A method that carries the
	// covariance along its own recursion may then leave it in
	// Covariance (Rows×Rows, row-major, both triangles); when it leaves
	// Covariance nil the driver forms the product from Data.
	ColumnVariances []float64
	Covariance      []float64

	step func(k int) // set by the driver recording the steps (see Step)
}

// NewJacobian allocates the two buffers of the Jacobian of m.
func NewJacobian(m *Prepared) *Jacobian {
	c := m.Columns()
	return &Jacobian{Rows: m.nt, Cols: c, Data: make([]float64, m.nt*c), Work: make([]float64, m.nt*c)}
}

// At returns J[r][c].
func (jc *Jacobian) At(r, c int) float64 { return jc.Data[r*jc.Cols+c] }

// denseBytes is the memory estimate of the dense Jacobian (two buffers)
// plus, when full is set, the covariance and, with fewer columns than
// truth bins, the part of a work matrix of its size that the Jacobian's
// second buffer cannot hold (a method carrying the covariance along its
// recursion needs one).
func denseBytes(nt, cols int, full bool) int64 {
	b := 16 * int64(nt) * int64(cols)
	if full {
		b += 8*int64(nt)*int64(nt) + 8*int64(nt)*int64(max(0, nt-cols))
	}
	return b
}

// variances returns diag(J diag(v) Jᵀ) for the variances v of the
// columns.
func (jc *Jacobian) variances(v []float64) []float64 {
	out := make([]float64, jc.Rows)
	parallel.For(jc.Rows, runtime.GOMAXPROCS(0), func(r int) {
		row := jc.Data[r*jc.Cols : (r+1)*jc.Cols]
		var s float64
		for q, x := range row {
			s += x * x * v[q]
		}
		out[r] = s
	})
	return out
}

// covarianceBlock is the row block of the covariance product.
const covarianceBlock = 512

// covariance returns J diag(v) Jᵀ. The scaled copy J diag(v) goes into
// Work; the upper triangle of blocks is computed with general matrix
// multiplies (gonum Dgemm, faster here than a symmetric rank-k update),
// about half the work of the full product.
func (jc *Jacobian) covariance(ctx context.Context, v []float64) (*mat.SymDense, error) {
	nt, cols := jc.Rows, jc.Cols
	parallel.For(nt, runtime.GOMAXPROCS(0), func(r int) {
		src := jc.Data[r*cols : (r+1)*cols]
		dst := jc.Work[r*cols : (r+1)*cols]
		for q, x := range src {
			dst[q] = x * v[q]
		}
	})
	jd := mat.NewDense(nt, cols, jc.Work)
	j := mat.NewDense(nt, cols, jc.Data)
	out := mat.NewDense(nt, nt, nil)
	for i0 := 0; i0 < nt; i0 += covarianceBlock {
		i1 := min(nt, i0+covarianceBlock)
		a := jd.Slice(i0, i1, 0, cols)
		for k0 := i0; k0 < nt; k0 += covarianceBlock {
			if err := ctx.Err(); err != nil {
				return nil, err
			}
			k1 := min(nt, k0+covarianceBlock)
			dst := out.Slice(i0, i1, k0, k1).(*mat.Dense)
			dst.Mul(a, j.Slice(k0, k1, 0, cols).T())
		}
	}
	jc.Work = nil // the scaled copy is no longer needed
	return mat.NewSymDense(nt, out.RawMatrix().Data), nil
}
