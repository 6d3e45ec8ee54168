package observable_test

import (
	"fmt"

	"github.com/desmear/desmear/unfold/inputs/observable"
)

func ExampleCompile() {
	cols := []string{"px", "py", "pass_reco"}
	pt, err := observable.Compile("sqrt(px*px+py*py)", cols)
	if err != nil {
		fmt.Println(err)
		return
	}
	sel := observable.MustCompile("pass_reco && sqrt(px*px+py*py) > 4", cols)

	// Three events, column-major.
	data := [][]float64{
		{3, 6, 1}, // px
		{4, 8, 1}, // py
		{1, 0, 1}, // pass_reco
	}
	ptv := make([]float64, 3)
	selv := make([]float64, 3)
	pt.Eval(ptv, data)
	sel.Eval(selv, data)
	fmt.Println(ptv, selv, pt.ColumnNames())
	fmt.Println(pt.EvalRow([]float64{5, 12, 0}))
	// Output:
	// [5 10 1.4142135623730951] [1 0 0] [px py]
	// 13
}

func ExampleCompile_error() {
	_, err := observable.Compile("sqrt(px*px+pz*pz)", []string{"px", "py"})
	fmt.Println(err)
	_, err = observable.Compile("hypot(px)", []string{"px", "py"})
	fmt.Println(err)
	// Output:
	// expression "sqrt(px*px+pz*pz)": column 12: unknown column "pz"; did you mean "px"?
	// expression "hypot(px)": column 1: hypot takes 2 arguments, got 1
}
