package sparse

import (
	"errors"
	"fmt"
	"slices"
)

// Sum returns the cell-by-cell sum of the matrices, which must all have
// the same dimensions. It is the ordered merge of the matrices' cells:
// every cell stored in any of them is stored in the result (also when
// its values cancel to zero), and its value and its sum of squared
// weights are the values of the matrices that store it added in argument
// order, left to right, starting from the first of them. So a sequence
// folded in consecutive groups gives the same bits as the sequence at
// once: Sum(Sum(a, b), c, d) equals Sum(a, b, c, d), which lets partial
// results be merged as they arrive. The result carries sums of squared
// weights when every matrix does, and none otherwise. The result shares
// no storage with the arguments.
//
// Sum returns an error if no matrix is given, if the dimensions differ,
// or if a sum overflows to infinity.
func Sum(ms ...*Matrix) (*Matrix, error) {
	if len(ms) == 0 {
		return nil, errors.New("sparse: Sum of no matrices")
	}
	rows, cols := ms[0].Dims()
	nnz, withW2 := 0, true
	for k, m := range ms {
		if r, c := m.Dims(); r != rows || c != cols {
			return nil, fmt.Errorf("sparse: Sum of a %d×%d and a %d×%d matrix (argument %d)", rows, cols, r, c, k)
		}
		nnz += m.NNZ()
		withW2 = withW2 && m.sumw2 != nil
	}
	if len(ms) == 1 {
		nnz = ms[0].NNZ()
	}
	colPtr := make([]int, cols+1)
	rowIdx := make([]int, 0, nnz)
	val := make([]float64, 0, nnz)
	var sw2 []float64
	if withW2 {
		sw2 = make([]float64, 0, nnz)
	}
	// The entries of a column from every matrix, in argument order; a
	// stable sort by row keeps that order among equal rows.
	type ent struct {
		row     int
		v, sum2 float64
	}
	var buf []ent
	for j := 0; j < cols; j++ {
		buf = buf[:0]
		for _, m := range ms {
			for p := m.colPtr[j]; p < m.colPtr[j+1]; p++ {
				e := ent{row: m.rowIdx[p], v: m.val[p]}
				if withW2 {
					e.sum2 = m.sumw2[p]
				}
				buf = append(buf, e)
			}
		}
		slices.SortStableFunc(buf, func(a, b ent) int { return a.row - b.row })
		for p := 0; p < len(buf); {
			e := buf[p]
			p++
			for p < len(buf) && buf[p].row == e.row {
				e.v += buf[p].v
				e.sum2 += buf[p].sum2
				p++
			}
			if e.v-e.v != 0 || e.sum2-e.sum2 != 0 {
				return nil, fmt.Errorf("sparse: the sum of cell (row %d, column %d) overflows", e.row, j)
			}
			rowIdx = append(rowIdx, e.row)
			val = append(val, e.v)
			if withW2 {
				sw2 = append(sw2, e.sum2)
			}
		}
		colPtr[j+1] = len(val)
	}
	return NewMatrix(rows, cols, colPtr, rowIdx, val, sw2)
}
