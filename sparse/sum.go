package sparse

import (
	"errors"
	"fmt"
	"math/bits"
	"runtime"
	"sort"
	"sync"
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
	rowIdx := make([]int, nnz)
	val := make([]float64, nnz)
	var sw2 []float64
	if withW2 {
		sw2 = make([]float64, nnz)
	}
	kb := uint(bits.Len(uint(len(ms))))
	if bits.Len(uint(rows))+int(kb) > 64 {
		return nil, fmt.Errorf("sparse: Sum of %d matrices of %d rows is too large", len(ms), rows)
	}
	// The columns are independent: ranges of columns of about equal input
	// cells are merged on goroutines of their own, each writing from the
	// position its inputs start at (an upper bound of its output's), and
	// the outputs are then moved down to be contiguous. The result does
	// not depend on the number of ranges.
	parts := 1
	if nnz >= sumParallelCells && len(ms) > 1 {
		parts = min(runtime.GOMAXPROCS(0), maxSumParts)
	}
	bounds := make([]int, parts+1) // column ranges
	starts := make([]int, parts+1) // their first input cell
	bounds[parts] = cols
	starts[parts] = nnz
	for q := 1; q < parts; q++ {
		// The first column whose inputs start at or after q·nnz/parts.
		target := q * nnz / parts
		j := sort.Search(cols, func(j int) bool {
			n := 0
			for _, m := range ms {
				n += m.colPtr[j]
			}
			return n >= target
		})
		bounds[q] = max(j, bounds[q-1])
		for _, m := range ms {
			starts[q] += m.colPtr[bounds[q]]
		}
	}
	ends := make([]int, parts)
	var wg sync.WaitGroup
	for q := 0; q < parts; q++ {
		run := func() {
			ends[q] = sumColumns(ms, bounds[q], bounds[q+1], starts[q], kb, colPtr, rowIdx, val, sw2)
		}
		if q == parts-1 {
			run()
			continue
		}
		wg.Add(1)
		go func() {
			defer wg.Done()
			run()
		}()
	}
	wg.Wait()
	n := ends[0]
	for q := 1; q < parts; q++ {
		shift := starts[q] - n
		copy(rowIdx[n:], rowIdx[starts[q]:ends[q]])
		copy(val[n:], val[starts[q]:ends[q]])
		if withW2 {
			copy(sw2[n:], sw2[starts[q]:ends[q]])
		}
		for j := bounds[q] + 1; j <= bounds[q+1]; j++ {
			colPtr[j] -= shift
		}
		n += ends[q] - starts[q]
	}
	rowIdx, val = rowIdx[:n:n], val[:n:n]
	if withW2 {
		sw2 = sw2[:n:n]
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

// sumParallelCells is the number of input cells from which Sum merges
// ranges of columns in parallel, and maxSumParts the most ranges.
const (
	sumParallelCells = 1 << 18
	maxSumParts      = 8
)

// sumColumns merges the columns [j0, j1) of ms into rowIdx, val and sw2
// (nil without squared weights) from position at on, setting colPtr[j+1]
// for each of its columns, and returns the position after its last cell.
// Per column, a k-way merge of the matrices' row lists: a binary heap of
// packed keys (row, argument number, kb bits), so that equal rows come
// out in argument order; the last list left is copied whole.
func sumColumns(ms []*Matrix, j0, j1, at int, kb uint, colPtr, rowIdx []int, val, sw2 []float64) int {
	withW2 := sw2 != nil
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
	n := at
	for j := j0; j < j1; j++ {
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
				val[n-1] += m.val[p]
				if withW2 {
					sw2[n-1] += m.sumw2[p]
				}
			} else {
				rowIdx[n] = r
				val[n] = m.val[p]
				if withW2 {
					sw2[n] = m.sumw2[p]
				}
				n++
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
				val[n-1] += m.val[p]
				if withW2 {
					sw2[n-1] += m.sumw2[p]
				}
				p++
			}
			n += copy(rowIdx[n:], m.rowIdx[p:end])
			copy(val[n-(end-p):], m.val[p:end])
			if withW2 {
				copy(sw2[n-(end-p):], m.sumw2[p:end])
			}
		}
		colPtr[j+1] = n
	}
	return n
}
