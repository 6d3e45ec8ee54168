package sparsetest_test

import (
	"fmt"
	"log"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/sparse/sparsetest"
)

// The synthetic banded response of a small 3-D analysis: 4x4x2 truth
// bins migrating into 4x4x4 reco bins. Clipped at the grid edges, a truth
// bin has (2 or 3)·(2 or 3)·3 candidate reco bins, of which at most 20 are
// kept: 8 bins keep 20, 16 keep 18 and 8 keep 12, 544 in all.
func ExampleBanded3D() {
	b, err := sparsetest.Banded3D([3]int{4, 4, 2}, [3]int{4, 4, 4}, [3]int{3, 3, 4}, 20, 1)
	if err != nil {
		log.Fatal(err)
	}
	m, err := sparse.NewMatrix(b.Rows, b.Cols, b.ColPtr, b.RowIdx, b.Val, nil)
	if err != nil {
		log.Fatal(err)
	}
	r, c := m.Dims()
	eff := make([]float64, c)
	m.ColSums(eff)
	lo, hi := eff[0], eff[0]
	for _, e := range eff {
		lo, hi = min(lo, e), max(hi, e)
	}
	fmt.Printf("%d×%d, %d non-zeros, efficiencies in [%.2f, %.2f]\n", r, c, m.NNZ(), lo, hi)
	// Output:
	// 64×32, 544 non-zeros, efficiencies in [0.60, 0.95]
}
