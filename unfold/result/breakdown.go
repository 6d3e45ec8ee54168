package result

import (
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result/figure"
)

// relative returns u/|μ| for truth bin g of r: NaN where the bin is not
// determined or its estimate is 0.
func relative(r *Result, u []float64, g int) float64 {
	if u == nil || !r.Determined[g] || r.Estimate[g] == 0 {
		return math.NaN()
	}
	return u[g] / math.Abs(r.Estimate[g])
}

// breakdownSteps returns the step lines of the relative uncertainty of
// the bins, between edges: the total first, then each source.
func breakdownSteps(r *Result, bins []int, edges []float64) []figure.Steps {
	series := []figure.Steps{{Name: "total", Edges: edges, Y: make([]float64, len(bins))}}
	for i, g := range bins {
		series[0].Y[i] = relative(r, r.Uncertainty, g)
	}
	for _, src := range r.Sources {
		st := figure.Steps{Name: src.Name, Edges: edges, Y: make([]float64, len(bins))}
		for i, g := range bins {
			st.Y[i] = relative(r, src.Uncertainty, g)
		}
		series = append(series, st)
	}
	return series
}

// breakdownPlots returns the uncertainty breakdown by source: with a
// truth binning one chart per slice of s (the relative uncertainty of
// each source and the total along the slice's last axis, at the real
// bin edges), without one a chart over the global truth index. Only
// when r has more than one source.
func breakdownPlots(r *Result, s *binning.Scheme) []Plot {
	if len(r.Sources) < 2 || r.Uncertainty == nil {
		return nil
	}
	const caption = "Relative uncertainty (uncertainty ÷ estimate) per truth bin by source, and the total (the sources add in quadrature), "
	if s == nil || s.Len() != len(r.Estimate) {
		nt := len(r.Estimate)
		bins, edges := make([]int, nt), make([]float64, nt+1)
		for j := range bins {
			bins[j], edges[j+1] = j, float64(j+1)
		}
		return []Plot{{
			Name:    "uncertainty",
			Caption: caption + "in global-index order.",
			Figure: &figure.Chart{Title: "Uncertainty by source", XLabel: "truth bin (global index)", XMin: 0, XMax: float64(nt),
				Panels: []figure.Panel{{YLabel: "relative uncertainty", Steps: breakdownSteps(r, bins, edges), VLines: truthBounds(r, nil)}}},
		}}
	}
	var plots []Plot
	for _, sl := range Slices(s) {
		reg := s.Regions()[sl.Region]
		axes := reg.Axes()
		last := axes[len(axes)-1]
		plots = append(plots, Plot{
			Name:    "uncertainty_" + reg.Name() + sl.Suffix(s),
			Caption: caption + sl.Name(s) + ".",
			Figure: &figure.Chart{Title: "Uncertainty by source, " + sl.Name(s), XLabel: axisLabel(last.Name(), last.Unit()),
				XMin: sl.Edges[0], XMax: sl.Edges[len(sl.Edges)-1],
				Panels: []figure.Panel{{YLabel: "relative uncertainty", Steps: breakdownSteps(r, sl.Bins(), sl.Edges)}}},
		})
	}
	return plots
}
