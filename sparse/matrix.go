package sparse

import (
	"errors"
	"fmt"

	jb "github.com/james-bowman/sparse"
	"gonum.org/v1/gonum/mat"
)

// Matrix is a rows×cols sparse matrix held once, in compressed-column
// form: a james-bowman/sparse CSC whose arrays this package builds,
// exactly deduplicated, with the row indices of each column strictly
// increasing. Beside each stored value it may keep the sum of squared
// weights that produced it (nil when not known).
//
// A Matrix is immutable after construction except through the documented
// in-place method ScaleCols. All its other methods, the kernels included,
// may be called concurrently from many goroutines: each kernel call takes
// its own scatter buffers from a free list kept with the matrix structure.
type Matrix struct {
	rows, cols int
	csc        *jb.CSC
	colPtr     []int
	rowIdx     []int
	val        []float64
	sumw2      []float64
	part       *partition // fixed column partition for the parallel kernels
}

// NewMatrix returns the rows×cols matrix whose column j holds the values
// val[colPtr[j]:colPtr[j+1]] at the rows rowIdx[colPtr[j]:colPtr[j+1]].
// sumw2 may be nil; otherwise it is parallel to val. The slices are used
// as the storage of the matrix (no copy): the caller must not change them
// afterwards.
//
// NewMatrix returns an error if the arrays are not a valid, exactly
// deduplicated compressed-column matrix (lengths, monotone column
// pointers, row indices in range and strictly increasing in each column,
// finite values, finite non-negative squared-weight sums).
func NewMatrix(rows, cols int, colPtr, rowIdx []int, val, sumw2 []float64) (*Matrix, error) {
	if rows < 0 || cols < 0 {
		return nil, fmt.Errorf("sparse: negative dimensions %d×%d", rows, cols)
	}
	if len(colPtr) != cols+1 {
		return nil, fmt.Errorf("sparse: %d column pointers for %d columns, want %d", len(colPtr), cols, cols+1)
	}
	if colPtr[0] != 0 {
		return nil, errors.New("sparse: first column pointer is not 0")
	}
	nnz := colPtr[cols]
	if len(rowIdx) != nnz || len(val) != nnz {
		return nil, fmt.Errorf("sparse: %d row indices and %d values for %d non-zeros", len(rowIdx), len(val), nnz)
	}
	if sumw2 != nil && len(sumw2) != nnz {
		return nil, fmt.Errorf("sparse: %d squared-weight sums for %d non-zeros", len(sumw2), nnz)
	}
	for j := 0; j < cols; j++ {
		lo, hi := colPtr[j], colPtr[j+1]
		if hi < lo || hi > nnz {
			return nil, fmt.Errorf("sparse: column pointers decrease at column %d", j)
		}
		prev := -1
		for k := lo; k < hi; k++ {
			i := rowIdx[k]
			if i < 0 || i >= rows {
				return nil, fmt.Errorf("sparse: row index %d out of range [0,%d) in column %d", i, rows, j)
			}
			if i <= prev {
				return nil, fmt.Errorf("sparse: row indices of column %d are not strictly increasing (%d after %d)", j, i, prev)
			}
			prev = i
			if v := val[k]; v-v != 0 {
				return nil, fmt.Errorf("sparse: non-finite value %v at (%d,%d)", v, i, j)
			}
			if sumw2 != nil {
				if v := sumw2[k]; v-v != 0 || v < 0 {
					return nil, fmt.Errorf("sparse: squared-weight sum %v at (%d,%d) is not a finite non-negative number", v, i, j)
				}
			}
		}
	}
	m := &Matrix{rows: rows, cols: cols, colPtr: colPtr, rowIdx: rowIdx, val: val, sumw2: sumw2}
	m.csc = jb.NewCSC(rows, cols, colPtr, rowIdx, val)
	m.part = newPartition(rows, colPtr, rowIdx)
	return m, nil
}

// Dims returns the number of rows and columns.
func (m *Matrix) Dims() (rows, cols int) { return m.rows, m.cols }

// NNZ returns the number of stored entries.
func (m *Matrix) NNZ() int { return len(m.val) }

// ColPtr returns the column pointers (length cols+1). The slice aliases
// the matrix storage and must not be modified.
func (m *Matrix) ColPtr() []int { return m.colPtr }

// RowIdx returns the row index of every stored entry, column by column.
// The slice aliases the matrix storage and must not be modified.
func (m *Matrix) RowIdx() []int { return m.rowIdx }

// Values returns the stored values, column by column. The slice aliases
// the matrix storage and must not be modified.
func (m *Matrix) Values() []float64 { return m.val }

// SumW2 returns the per-entry sums of squared weights, parallel to
// Values, or nil if the matrix does not carry them. The slice aliases the
// matrix storage and must not be modified.
func (m *Matrix) SumW2() []float64 { return m.sumw2 }

// At returns the value at row i, column j (0 where nothing is stored),
// by binary search in column j. It panics if i or j is out of range.
func (m *Matrix) At(i, j int) float64 {
	if uint(i) >= uint(m.rows) || uint(j) >= uint(m.cols) {
		panic(mat.ErrIndexOutOfRange)
	}
	lo, hi := m.colPtr[j], m.colPtr[j+1]
	for lo < hi {
		mid := int(uint(lo+hi) >> 1)
		switch r := m.rowIdx[mid]; {
		case r == i:
			return m.val[mid]
		case r < i:
			lo = mid + 1
		default:
			hi = mid
		}
	}
	return 0
}

// CSC returns the matrix as a james-bowman/sparse CSC sharing this
// matrix's storage, for interoperation with gonum's mat package on small
// problems. Do not pass it to gonum's VecDense.MulVec (that falls back to
// At per element); use this package's kernels instead. Do not call its
// Set or MulVecTo: Set would break the sharing and MulVecTo adds into its
// destination rather than overwriting it.
func (m *Matrix) CSC() *jb.CSC { return m.csc }

// MaxDenseElements is the largest number of elements (rows×cols) that
// ToDense converts: 2^26 elements, 512 MiB of float64.
const MaxDenseElements = 1 << 26

// ToDense returns the matrix as a gonum dense matrix, for tests and small
// problems. It returns an error if rows×cols exceeds MaxDenseElements or
// if the matrix has no rows or no columns (gonum has no empty dense
// matrices).
func (m *Matrix) ToDense() (*mat.Dense, error) {
	if m.rows == 0 || m.cols == 0 {
		return nil, fmt.Errorf("sparse: cannot make a dense copy of a %d×%d matrix", m.rows, m.cols)
	}
	if m.rows > MaxDenseElements/m.cols {
		return nil, fmt.Errorf("sparse: a dense copy of the %d×%d matrix would hold %d elements, more than the limit %d; use the sparse kernels instead",
			m.rows, m.cols, int64(m.rows)*int64(m.cols), MaxDenseElements)
	}
	d := mat.NewDense(m.rows, m.cols, nil)
	raw := d.RawMatrix()
	for j := 0; j < m.cols; j++ {
		for k := m.colPtr[j]; k < m.colPtr[j+1]; k++ {
			raw.Data[m.rowIdx[k]*raw.Stride+j] = m.val[k]
		}
	}
	return d, nil
}

// WithValues returns a matrix with the structure (dimensions, column
// pointers, row indices, partition) of m and the values val, parallel to
// Values, and squared-weight sums sumw2 (may be nil). The structure is
// shared, not copied; val and sumw2 become the new matrix's storage. This
// is the cheap way to hold many matrices of one pattern, for example
// resampled responses. It returns an error if the lengths do not match, a
// value is not finite or a squared-weight sum is not a finite
// non-negative number (the checks of NewMatrix).
func (m *Matrix) WithValues(val, sumw2 []float64) (*Matrix, error) {
	if len(val) != len(m.val) {
		return nil, fmt.Errorf("sparse: %d values for a matrix with %d non-zeros", len(val), len(m.val))
	}
	if sumw2 != nil && len(sumw2) != len(m.val) {
		return nil, fmt.Errorf("sparse: %d squared-weight sums for a matrix with %d non-zeros", len(sumw2), len(m.val))
	}
	for k, v := range val {
		if v-v != 0 {
			return nil, fmt.Errorf("sparse: non-finite value %v at entry %d", v, k)
		}
	}
	for k, v := range sumw2 {
		if v-v != 0 || v < 0 {
			return nil, fmt.Errorf("sparse: squared-weight sum %v at entry %d is not a finite non-negative number", v, k)
		}
	}
	n := *m
	n.val, n.sumw2 = val, sumw2
	n.csc = jb.NewCSC(m.rows, m.cols, m.colPtr, m.rowIdx, val)
	return &n, nil
}

// Clone returns a copy of m whose values and squared-weight sums are its
// own (so that ScaleCols on one does not change the other); the
// structure is shared.
func (m *Matrix) Clone() *Matrix {
	var w2 []float64
	if m.sumw2 != nil {
		w2 = append([]float64(nil), m.sumw2...)
	}
	n, err := m.WithValues(append([]float64(nil), m.val...), w2)
	if err != nil {
		panic(err) // the values of m are finite by construction
	}
	return n
}
