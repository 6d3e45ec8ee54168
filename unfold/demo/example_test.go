package demo_test

import (
	"context"
	"fmt"
	"log"
	"math"
	"os"
	"path/filepath"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold/demo"
)

func ExampleGenerate() {
	base, err := os.MkdirTemp("", "demo-example-")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(base)
	in, err := demo.Generate(context.Background(), filepath.Join(base, "demo"), demo.Config{Events: 20_000, Seed: 1}, false)
	if err != nil {
		log.Fatal(err)
	}
	entries, _ := os.ReadDir(in.Dir)
	for _, e := range entries {
		fmt.Println(e.Name())
	}
	fmt.Println("simulated events:", in.SimulatedEvents)
	// Output:
	// analysis.yaml
	// data.parquet
	// data.root
	// reco-binning.yaml
	// scenario.json
	// simulation.parquet
	// simulation.root
	// stress-test.yaml
	// truth-binning.yaml
	// truth-expected.csv
	// truth.csv
	// simulated events: 20000
}

func ExampleExpectedTruth() {
	s := demo.TruthScheme()
	want := demo.ExpectedTruth(s, demo.DefaultConfig())
	for _, g := range []int{0, 7, 15} {
		fmt.Printf("%-30s %8.1f\n", s.Label(g), want[g])
	}
	fmt.Println("truth bins:", s.Len(), "in range:", s.InRange())
	// Output:
	// central y[0,0.8) pt[20,25)      17213.4
	// central y[0,0.8) pt[110,160)      203.5
	// forward y[1.6,2) pt[20,25)       6767.6
	// truth bins: 33 in range: 25
}

func ExampleCompare() {
	s := demo.TruthScheme()
	cfg := demo.DefaultConfig()
	truth := &demo.Truth{Scheme: s, Expected: demo.ExpectedTruth(s, cfg)}
	// A made-up estimate 1% above the truth with Poisson-like
	// uncertainties and no correlations.
	est := make([]float64, s.Len())
	unc := make([]float64, s.Len())
	cov := mat.NewSymDense(s.Len(), nil)
	for g, t := range truth.Expected {
		est[g] = 1.01 * t
		unc[g] = math.Sqrt(t)
		cov.SetSym(g, g, t)
	}
	c, err := demo.Compare(truth, est, unc, cov)
	if err != nil {
		log.Fatal(err)
	}
	r := c.Rows[0]
	fmt.Printf("%s: %.1f vs %.1f ± %.1f, pull %+.2f\n", r.Label, r.Unfolded, r.Truth, r.Uncertainty, r.Pull)
	fmt.Printf("chi2/ndf = %.1f/%d\n", c.Chi2, c.NDF)
	// Output:
	// central y[0,0.8) pt[20,25): 17385.5 vs 17213.4 ± 131.2, pull +1.31
	// chi2/ndf = 10.0/25
}
