package sparse

import (
	"errors"
	"fmt"
	"math/bits"
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
	// Per column, a k-way merge of the matrices' row lists: a binary heap
	// of packed keys (row, argument number), so that equal rows come out
	// in argument order; the last list left is copied whole.
	kb := uint(bits.Len(uint(len(ms))))
	if bits.Len(uint(rows))+int(kb) > 64 {
		return nil, fmt.Errorf("sparse: Sum of %d matrices of %d rows is too large", len(ms), rows)
	}
	kmask := uint64(1)<<kb - 1
	pos := make([]int, len(ms))
	heap := make([]uint64, 0, len(ms))
	down := func(i int) {
		n := len(heap)
		for {
			l := 2*i + 1
			if l >= n {
				return
			}
			if r := l + 1; r < n && heap[r] < heap[l] {
				l = r
			}
			if heap[l] >= heap[i] {
				return
			}
			heap[i], heap[l] = heap[l], heap[i]
			i = l
		}
	}
	for j := 0; j < cols; j++ {
		heap = heap[:0]
		for k, m := range ms {
			p := m.colPtr[j]
			pos[k] = p
			if p < m.colPtr[j+1] {
				heap = append(heap, uint64(m.rowIdx[p])<<kb|uint64(k))
			}
		}
		for i := len(heap)/2 - 1; i >= 0; i-- {
			down(i)
		}
		last := -1
		for len(heap) > 1 {
			top := heap[0]
			k := int(top & kmask)
			m := ms[k]
			p := pos[k]
			if r := int(top >> kb); r == last {
				q := len(val) - 1
				val[q] += m.val[p]
				if withW2 {
					sw2[q] += m.sumw2[p]
				}
			} else {
				rowIdx = append(rowIdx, r)
				val = append(val, m.val[p])
				if withW2 {
					sw2 = append(sw2, m.sumw2[p])
				}
				last = r
			}
			p++
			pos[k] = p
			if p < m.colPtr[j+1] {
				heap[0] = uint64(m.rowIdx[p])<<kb | uint64(k)
			} else {
				heap[0] = heap[len(heap)-1]
				heap = heap[:len(heap)-1]
			}
			down(0)
		}
		if len(heap) == 1 {
			k := int(heap[0] & kmask)
			m := ms[k]
			p, end := pos[k], m.colPtr[j+1]
			if m.rowIdx[p] == last {
				q := len(val) - 1
				val[q] += m.val[p]
				if withW2 {
					sw2[q] += m.sumw2[p]
				}
				p++
			}
			rowIdx = append(rowIdx, m.rowIdx[p:end]...)
			val = append(val, m.val[p:end]...)
			if withW2 {
				sw2 = append(sw2, m.sumw2[p:end]...)
			}
		}
		colPtr[j+1] = len(val)
	}
	for p, v := range val {
		if v-v != 0 || withW2 && sw2[p]-sw2[p] != 0 {
			j := 0
			for colPtr[j+1] <= p {
				j++
			}
			return nil, fmt.Errorf("sparse: the sum of cell (row %d, column %d) overflows", rowIdx[p], j)
		}
	}
	return NewMatrix(rows, cols, colPtr, rowIdx, val, sw2)
}
