package fill

import (
	"slices"

	"github.com/desmear/desmear/sparse"
)

// cells sums (reco, truth, w) entries per cell in the order they are
// added, in an open-addressing hash table keyed by the packed cell
// (truth<<32 | reco). Because entries arrive in event order (the
// pipeline hands batches to the consumer in sequence), every cell's sum
// is formed in event order and the result is the same bits whatever the
// number of workers. Memory grows with the number of distinct cells.
type cells struct {
	keys  []uint64 // key+1, 0 = empty slot
	slot  []int32  // index into val/sumw2
	val   []float64
	sumw2 []float64
	order []uint64 // key of each index
	mask  uint64
}

func newCells() *cells {
	c := &cells{}
	c.resize(1 << 12)
	return c
}

func (c *cells) resize(n int) {
	c.keys = make([]uint64, n)
	c.slot = make([]int32, n)
	c.mask = uint64(n - 1)
	for i, k := range c.order {
		c.insertSlot(k, int32(i))
	}
}

func hash(k uint64) uint64 {
	k ^= k >> 33
	k *= 0xff51afd7ed558ccd
	k ^= k >> 33
	return k
}

func (c *cells) insertSlot(k uint64, idx int32) {
	h := hash(k) & c.mask
	for c.keys[h] != 0 {
		h = (h + 1) & c.mask
	}
	c.keys[h] = k + 1
	c.slot[h] = idx
}

// add adds w to cell (reco, truth).
func (c *cells) add(reco, truth int32, w float64) {
	k := uint64(uint32(truth))<<32 | uint64(uint32(reco))
	h := hash(k) & c.mask
	for {
		switch c.keys[h] {
		case k + 1:
			i := c.slot[h]
			c.val[i] += w
			c.sumw2[i] += w * w
			return
		case 0:
			idx := int32(len(c.val))
			c.keys[h] = k + 1
			c.slot[h] = idx
			c.val = append(c.val, w)
			c.sumw2 = append(c.sumw2, w*w)
			c.order = append(c.order, k)
			if 2*len(c.val) > len(c.keys) {
				c.resize(2 * len(c.keys))
			}
			return
		}
		h = (h + 1) & c.mask
	}
}

// matrix returns the rows×cols compressed-column matrix of the cells
// and the cells whose sum is negative.
func (c *cells) matrix(rows, cols int) (*sparse.Matrix, []Cell, error) {
	idx := make([]int32, len(c.order))
	for i := range idx {
		idx[i] = int32(i)
	}
	slices.SortFunc(idx, func(a, b int32) int {
		ka, kb := c.order[a], c.order[b]
		switch {
		case ka < kb:
			return -1
		case ka > kb:
			return 1
		}
		return 0
	})
	colPtr := make([]int, cols+1)
	rowIdx := make([]int, len(idx))
	val := make([]float64, len(idx))
	sumw2 := make([]float64, len(idx))
	var neg []Cell
	for p, i := range idx {
		k := c.order[i]
		col, row := int(k>>32), int(uint32(k))
		colPtr[col+1]++
		rowIdx[p] = row
		val[p] = c.val[i]
		sumw2[p] = c.sumw2[i]
		if val[p] < 0 {
			neg = append(neg, Cell{Reco: row, Truth: col, Value: val[p]})
		}
	}
	for j := 0; j < cols; j++ {
		colPtr[j+1] += colPtr[j]
	}
	m, err := sparse.NewMatrix(rows, cols, colPtr, rowIdx, val, sumw2)
	return m, neg, err
}

// Cell is one cell of the migration matrix.
type Cell struct {
	Reco  int     `json:"reco"`
	Truth int     `json:"truth"`
	Value float64 `json:"value"`
}
