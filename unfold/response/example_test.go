package response_test

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/response"
)

// column returns an Expr copying input column i.
func column(i int) response.Expr {
	return response.Func(func(dst []float64, cols [][]float64) { copy(dst, cols[i]) })
}

func ExampleBuilder() {
	// One axis x with bins [0,1), [1,2), [2,3) and no flows, at both levels.
	ax, _ := binning.NewAxis("x", "", []float64{0, 1, 2, 3}, false, false)
	reg, _ := binning.NewRegion("all", ax)
	scheme, _ := binning.NewScheme(reg)

	// Columns: truth x, reco x, truth selection, reco selection.
	cols := [][]float64{
		{0.5, 1.5, 2.5, 0.5, 9.0},
		{0.7, 1.2, 2.9, 0.4, 1.5},
		{1, 1, 1, 1, 0},
		{1, 1, 0, 1, 1},
	}
	sim := &response.Simulation{
		Sample: response.Sample{Name: "five events", Read: func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
			return fn(0, 5, cols)
		}},
		Truth:       response.Level{Observables: []response.Expr{column(0)}, Select: column(2)},
		Reco:        response.Level{Observables: []response.Expr{column(1)}, Select: column(3)},
		RecoInTruth: []int{0},
	}
	b := response.NewBuilder(scheme, scheme)
	if _, err := b.Add(context.Background(), sim, nil); err != nil {
		fmt.Println(err)
		return
	}
	r, err := b.Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	s := r.Summary
	fmt.Printf("events %d, migrations %d, misses %d, fakes %d\n", s.Events, s.Entries, s.Misses, s.Fakes)
	fmt.Println("generated:", r.Generated)
	fmt.Println("fakes:", r.Fakes)
	fmt.Println("efficiency:", r.Efficiency(nil))
	fmt.Println("purity:", r.Purity(nil))
	// Output:
	// events 5, migrations 3, misses 1, fakes 1
	// generated: [2 1 1]
	// fakes: [0 1 0]
	// efficiency: [1 1 0]
	// purity: [1 0.5 NaN]
}
