package validate

import (
	"fmt"

	"github.com/desmear/desmear/unfold/result/figure"
)

// ScanPlot is the name (without extension) of the figure of the scan in
// a validation folder, written as PNG and SVG.
const ScanPlot = "scan"

// ScanFigure returns the figure of the scan of r against k: the
// criterion's curve (with the toys' precision when it is a mean squared
// error), the summed squared bias and variance whose sum is the mean
// squared error, the mean |bias|/σ (with the threshold of bias_below),
// and the mean and smallest coverage of the truth (with 68.27%). The
// recommended k is marked by a vertical line in every panel.
func (r *Report) ScanFigure() *figure.Chart {
	n := len(r.Scan)
	k := make([]float64, n)
	crit, critErr := make([]float64, n), make([]float64, n)
	bias2, variance := make([]float64, n), make([]float64, n)
	bos, bosErr := make([]float64, n), make([]float64, n)
	covMean, covMin := make([]float64, n), make([]float64, n)
	for i, p := range r.Scan {
		k[i] = float64(p.K)
		crit[i] = r.Recommendation.Curve[i]
		switch r.Recommendation.Criterion {
		case MinMSE:
			critErr[i] = p.MSEError
		case MinMSEWeighted:
			critErr[i] = p.MSEWeightedError
		case BiasBelow:
			critErr[i] = p.BiasOverSigmaError
		}
		for j, d := range r.Determined {
			if d {
				bias2[i] += p.Bias[j] * p.Bias[j]
				variance[i] += p.Variance[j]
			}
		}
		bos[i], bosErr[i] = p.BiasOverSigma, p.BiasOverSigmaError
		covMean[i], covMin[i] = p.CoverageMean, p.CoverageMin
	}
	rec := []float64{float64(r.Recommended)}
	label := map[Criterion]string{MinMSE: "summed MSE", MinMSEWeighted: "MSE weighted by 1/truth", BiasBelow: "mean |bias|/σ"}[r.Recommendation.Criterion]
	var thr []float64
	if r.Recommendation.Criterion == BiasBelow {
		thr = []float64{r.Recommendation.Threshold}
	}
	return &figure.Chart{
		Title:  fmt.Sprintf("Scan of the iterations: %d toys from the %s truth; %d recommended (%s)", r.Toys, r.TruthSource, r.Recommended, r.Recommendation.Criterion),
		XLabel: "iterations k",
		XMin:   0.5, XMax: float64(n) + 0.5,
		Panels: []figure.Panel{
			{YLabel: label, VLines: rec, HLines: thr, Points: []figure.Points{{Name: "criterion " + string(r.Recommendation.Criterion), X: k, Y: crit, YErr: critErr}}},
			{YLabel: "Σ bias², Σ variance", LogY: true, VLines: rec, Lines: []figure.Line{{Name: "Σ bias²", X: k, Y: bias2}, {Name: "Σ variance", X: k, Y: variance}}},
			{YLabel: "mean |bias|/σ", VLines: rec, HLines: thr, Points: []figure.Points{{X: k, Y: bos, YErr: bosErr}}},
			{YLabel: "coverage", YMin: 0, YMax: 1, VLines: rec, HLines: []float64{oneSigma}, Lines: []figure.Line{{Name: "mean", X: k, Y: covMean}, {Name: "smallest", X: k, Y: covMin}}},
		},
	}
}
