package sparse

// partition is a fixed split of the columns into blocks, decided from the
// matrix structure alone (never from the number of cores), so that every
// kernel sums in the same order whatever the scheduling.
type partition struct {
	bounds []int // block b holds columns bounds[b]..bounds[b+1]-1
}

func newPartition(colPtr []int) *partition {
	cols := len(colPtr) - 1
	return &partition{bounds: []int{0, cols}}
}

// Fold computes dst = A x, overwriting dst. len(dst) must be the number
// of rows and len(x) the number of columns, otherwise Fold panics. dst
// must not alias x.
func (m *Matrix) Fold(dst, x []float64) {
	if len(dst) != m.rows || len(x) != m.cols {
		panic("sparse: Fold dimension mismatch")
	}
	clear(dst)
	for j := 0; j < m.cols; j++ {
		xj := x[j]
		for k := m.colPtr[j]; k < m.colPtr[j+1]; k++ {
			dst[m.rowIdx[k]] += m.val[k] * xj
		}
	}
}

// BackProject computes dst = Aᵀ y, overwriting dst. len(dst) must be the
// number of columns and len(y) the number of rows, otherwise BackProject
// panics. dst must not alias y.
func (m *Matrix) BackProject(dst, y []float64) {
	if len(dst) != m.cols || len(y) != m.rows {
		panic("sparse: BackProject dimension mismatch")
	}
	for j := 0; j < m.cols; j++ {
		var s float64
		for k := m.colPtr[j]; k < m.colPtr[j+1]; k++ {
			s += m.val[k] * y[m.rowIdx[k]]
		}
		dst[j] = s
	}
}

// Sweep makes one fused pass over the matrix. For every column j it
// gathers g = (Aᵀ y)_j, calls x := update(j, g), and scatters column j
// times x into next, so that on return next = A x' where x'_j is the value
// update returned for column j. next is overwritten; len(next) must be the
// number of rows and len(y) too. next must not alias y.
//
// update is called exactly once per column, possibly concurrently from
// several goroutines for different columns; it must only touch state
// belonging to column j.
func (m *Matrix) Sweep(next, y []float64, update func(j int, g float64) float64) {
	if len(next) != m.rows || len(y) != m.rows {
		panic("sparse: Sweep dimension mismatch")
	}
	clear(next)
	for j := 0; j < m.cols; j++ {
		lo, hi := m.colPtr[j], m.colPtr[j+1]
		var g float64
		for k := lo; k < hi; k++ {
			g += m.val[k] * y[m.rowIdx[k]]
		}
		x := update(j, g)
		for k := lo; k < hi; k++ {
			next[m.rowIdx[k]] += m.val[k] * x
		}
	}
}

// ColSums writes the sum of each column into dst (length cols).
func (m *Matrix) ColSums(dst []float64) {
	if len(dst) != m.cols {
		panic("sparse: ColSums dimension mismatch")
	}
	for j := 0; j < m.cols; j++ {
		var s float64
		for k := m.colPtr[j]; k < m.colPtr[j+1]; k++ {
			s += m.val[k]
		}
		dst[j] = s
	}
}

// RowSums writes the sum of each row into dst (length rows).
func (m *Matrix) RowSums(dst []float64) {
	if len(dst) != m.rows {
		panic("sparse: RowSums dimension mismatch")
	}
	clear(dst)
	for k, i := range m.rowIdx {
		dst[i] += m.val[k]
	}
}
