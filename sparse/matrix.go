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
// in-place methods (ScaleCols). Its kernels may be called concurrently.
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
// finite values).
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
		}
	}
	m := &Matrix{rows: rows, cols: cols, colPtr: colPtr, rowIdx: rowIdx, val: val, sumw2: sumw2}
	m.csc = jb.NewCSC(rows, cols, colPtr, rowIdx, val)
	m.part = newPartition(colPtr)
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
