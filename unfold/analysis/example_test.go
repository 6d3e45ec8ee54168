package analysis_test

import (
	"fmt"

	"github.com/desmear/desmear/unfold/analysis"
)

func ExampleDecode() {
	src := `
binning:
  truth:
    regions:
      - name: all
        axes:
          - {name: pt, unit: GeV, edges: [20, 30, 50, 100], overflow: true}
  reco:
    regions:
      - name: all
        axes:
          - {name: pt, unit: GeV, edges: [20, 25, 30, 40, 50, 75, 100], underflow: true, overflow: true}
observables:
  truth: {pt: "sqrt(px_true*px_true + py_true*py_true)"}
  reco: {pt: "sqrt(px*px + py*py)"}
simulation:
  - file: simulation.parquet
    weight: weight
    truth_selection: in_fiducial
    reco_selection: passed && sqrt(px*px + py*py) > 15
data:
  table: n.csv
unfolding:
  iterations: 4
output:
  folder: result
`
	a, err := analysis.Decode([]byte(src), "example.yaml")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("truth bins:", a.Truth.Len(), "reco bins:", a.Reco.Len())
	fmt.Println("truth pt:", a.Simulation[0].Truth[0].Text)
	fmt.Println("reco selection:", a.Simulation[0].RecoSelection.Text)
	fmt.Println("iterations:", a.Unfolding.Iterations, "prior:", a.Unfolding.Prior, "covariance:", a.Uncertainty.Covariance)

	// A misspelt key is an error naming the file, line and key.
	_, err = analysis.Decode([]byte("titel: x\n"), "example.yaml")
	fmt.Println(err)
	// Output:
	// truth bins: 4 reco bins: 8
	// truth pt: sqrt(px_true*px_true + py_true*py_true)
	// reco selection: passed && sqrt(px*px + py*py) > 15
	// iterations: 4 prior: simulation covariance: diag
	// example.yaml:1: titel: unknown key in the top level (known keys: title, binning, observables, simulation, response, data, backgrounds, unfolding, uncertainty, output, processing, validation, compare, variations)
}
