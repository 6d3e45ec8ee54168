package bayes_test

import (
	"context"
	"fmt"
	"log"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// A two-bin example with invented numbers: 80% of the events generated
// in truth bin 0 are reconstructed in reco bin 0, 20% in reco bin 1, and
// so on. The estimate approaches R⁻¹ n = (300, 100) as the iterations
// grow; the uncertainty is the linearised data-statistical one, which
// tends to sqrt(diag(R⁻¹ diag(n) R⁻ᵀ)) = (20.40, 14.71).
func Example() {
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
		res, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Full}, &bayes.Settings{Iterations: k})
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
	res, err := unfold.Unfold(context.Background(), p, nil, &bayes.Settings{StopChi2: 0.5})
	if err != nil {
		log.Fatal(err)
	}
	for _, h := range bayes.DetailsOf(res).History {
		fmt.Printf("%d χ²=%.3f logL=%.3f\n", h.Iteration, h.Chi2, h.LogLikelihood)
	}
	fmt.Println("converged:", bayes.DetailsOf(res).Converged)
	// Output:
	// 0 χ²=0.000 logL=1707.283
	// 1 χ²=26.096 logL=1725.588
	// 2 χ²=6.290 logL=1730.089
	// 3 χ²=1.703 logL=1731.357
	// 4 χ²=0.519 logL=1731.755
	// 5 χ²=0.170 logL=1731.888
	// converged: true
}

// Smoothing between iterations along the axis of a truth binning (one
// region of four bins, invented numbers): the smoothed prior damps the
// bin-to-bin fluctuations of the estimate.
func ExampleSmoothing() {
	x, err := binning.NewAxis("x", "", []float64{0, 1, 2, 3, 4}, false, false)
	if err != nil {
		log.Fatal(err)
	}
	reg, err := binning.NewRegion("signal", x)
	if err != nil {
		log.Fatal(err)
	}
	truth, err := binning.NewScheme(reg)
	if err != nil {
		log.Fatal(err)
	}
	// A diagonal-dominant response with 20% migration to each neighbour.
	a, err := sparse.NewMatrix(4, 4,
		[]int{0, 2, 5, 8, 10},
		[]int{0, 1, 0, 1, 2, 1, 2, 3, 2, 3},
		[]float64{0.7, 0.2, 0.2, 0.6, 0.2, 0.2, 0.6, 0.2, 0.2, 0.7}, nil)
	if err != nil {
		log.Fatal(err)
	}
	p := &unfold.Problem{Migrations: a, Generated: []float64{1, 1, 1, 1}, Data: []float64{130, 60, 140, 70}}
	for _, sm := range []*bayes.Smoothing{nil, {Neighbours: truth, Strength: 0.5}} {
		res, err := unfold.Unfold(context.Background(), p, nil, &bayes.Settings{Iterations: 10, Smoothing: sm})
		if err != nil {
			log.Fatal(err)
		}
		fmt.Printf("smoothing %-5v %.1f\n", sm != nil, res.Estimate)
	}
	// Output:
	// smoothing false [162.6 26.3 174.2 59.0]
	// smoothing true  [129.7 91.2 112.5 88.6]
}
