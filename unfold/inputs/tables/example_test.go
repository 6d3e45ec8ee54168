package tables_test

import (
	"fmt"
	"strings"

	"github.com/desmear/desmear/unfold/inputs/tables"
)

// Read the three required tables of a small problem and assemble it.
func ExampleSet_Assemble() {
	var s tables.Set
	var err error
	s.Response, err = tables.ReadResponse(strings.NewReader(`# reco,truth: 0-based global bins
reco,truth,value
0,0,80
1,0,10
1,1,90
`), "A.csv")
	if err != nil {
		fmt.Println(err)
		return
	}
	s.Generated, _ = tables.ReadVector(strings.NewReader("truth,value\n0,100\n1,100\n"), "G.csv", tables.Generated)
	s.Data, _ = tables.ReadVector(strings.NewReader("reco,value\n0,40\n1,50\n"), "n.csv", tables.Data)
	p, err := s.Assemble(s.Sizes())
	if err != nil {
		fmt.Println(err)
		return
	}
	rows, cols := p.Migrations.Dims()
	fmt.Printf("%d reco × %d truth bins, %d entries, data %v\n", rows, cols, p.Migrations.NNZ(), p.Data)
	// Output: 2 reco × 2 truth bins, 3 entries, data [40 50]
}

// Errors name the file, the line and the column.
func ExampleReadVector_error() {
	_, err := tables.ReadVector(strings.NewReader("reco,value\n0,12\n1,NaN\n"), "n.csv", tables.Data)
	fmt.Println(err)
	// Output: n.csv:3: field "value": NaN is not allowed; give a finite number
}
