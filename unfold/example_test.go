package unfold_test

import (
	"context"
	"fmt"
	"log"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// A two-bin example with invented numbers: 80% of the events generated
// in truth bin 0 are reconstructed in reco bin 0, 20% in reco bin 1, and
// so on. The estimate approaches R⁻¹ n = (300, 100) as the iterations
// grow; the uncertainty is the linearised data-statistical one, which
// tends to sqrt(diag(R⁻¹ diag(n) R⁻ᵀ)) = (20.40, 14.71).
func ExampleUnfold() {
	// Migrations (rows: reco, columns: truth) in compressed-column form.
	a, err := sparse.NewMatrix(2, 2, []int{0, 2, 4}, []int{0, 1, 0, 1}, []float64{800, 200, 100, 900}, nil)
	if err != nil {
		log.Fatal(err)
	}
	p := &unfold.Problem{
		Migrations: a,
		Generated:  []float64{1000, 1000},
		Data:       []float64{250, 150},
	}
	for _, k := range []int{1, 3, 100} {
		res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Iterations: k, Covariance: unfold.Full})
		if err != nil {
			log.Fatal(err)
		}
		fmt.Printf("K=%-3d estimate %.2f ± %.2f, %.2f ± %.2f\n", k,
			res.Estimate[0], res.Uncertainty[0], res.Estimate[1], res.Uncertainty[1])
	}
	// Output:
	// K=1   estimate 249.49 ± 14.23, 150.51 ± 10.17
	// K=3   estimate 284.67 ± 18.09, 115.33 ± 12.57
	// K=100 estimate 300.00 ± 20.40, 100.00 ± 14.71
}

// Stopping on the χ² between successive iterations, with the history of
// every iteration.
func ExampleSettings_stopChi2() {
	a, err := sparse.NewMatrix(2, 2, []int{0, 2, 4}, []int{0, 1, 0, 1}, []float64{800, 200, 100, 900}, nil)
	if err != nil {
		log.Fatal(err)
	}
	p := &unfold.Problem{Migrations: a, Generated: []float64{1000, 1000}, Data: []float64{250, 150}}
	res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{StopChi2: 0.5})
	if err != nil {
		log.Fatal(err)
	}
	for _, h := range res.History {
		fmt.Printf("%d χ²=%.3f logL=%.3f\n", h.Iteration, h.Chi2, h.LogLikelihood)
	}
	fmt.Println("converged:", res.Converged)
	// Output:
	// 0 χ²=0.000 logL=1707.283
	// 1 χ²=26.096 logL=1725.588
	// 2 χ²=6.290 logL=1730.089
	// 3 χ²=1.703 logL=1731.357
	// 4 χ²=0.519 logL=1731.755
	// 5 χ²=0.170 logL=1731.888
	// converged: true
}
