package rootio_test

import (
	"fmt"
	"os"
	"path/filepath"

	"github.com/desmear/desmear/unfold/internal/rootio"
)

func Example() {
	dir, _ := os.MkdirTemp("", "rootio-example-")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "spectra.root")

	// A 2x1 histogram: cells (ix, iy) with ix, iy counting the flows.
	h := rootio.NewHist2D("pt_y", []float64{0, 10, 50}, []float64{0, 2.5})
	h.Fill(5, 1, 1)    // bin (1,1)
	h.Fill(70, 1, 2)   // x overflow (3,1)
	h.Fill(20, -1, 3)  // y underflow (2,0)
	h.Fill(-1, 9, 0.5) // x underflow, y overflow (0,2)
	if err := rootio.WriteFile(path, nil, []*rootio.Hist2D{h}); err != nil {
		fmt.Println(err)
		return
	}
	g, err := rootio.ReadHist2D(path, "pt_y")
	if err != nil {
		fmt.Println(err)
		return
	}
	nx, ny := g.NBins()
	for iy := ny + 1; iy >= 0; iy-- {
		for ix := 0; ix <= nx+1; ix++ {
			fmt.Printf("%4g", g.SumW[g.Index(ix, iy)])
		}
		fmt.Println()
	}
	// Output:
	//  0.5   0   0   0
	//    0   1   0   2
	//    0   0   3   0
}
