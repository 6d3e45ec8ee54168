package result

import (
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold/result/figure"
)

// PlotsFolder is the sub-folder of the result folder holding the plots.
const PlotsFolder = "plots"

// MaxHeatBins is the largest number of bins along either axis of the
// response and correlation heat maps; larger results get none.
const MaxHeatBins = 400

// Plot is a figure of the report: its file name in PlotsFolder (without
// the extension), a caption, and the figure with the series it draws.
type Plot struct {
	Name, Caption string
	Figure        figure.Figure
}

// Plots returns the figures of r on the truth scheme s (nil for none):
// with a truth binning one spectrum per slice (the estimate as a
// density per unit bin volume, against the simulation truth and the
// prior scaled to the estimate's total, with their ratio below); with
// more than one source the uncertainty breakdown by source (per slice
// with a truth binning); the efficiency, purity and stability per truth
// bin; the data against the folded expectation with the pulls; the
// iteration history; the response and the correlation as heat maps (up
// to MaxHeatBins bins).
func Plots(r *Result, s *binning.Scheme) []Plot {
	var plots []Plot
	if s != nil && s.Len() == len(r.Estimate) {
		plots = append(plots, spectrumPlots(r, s)...)
	}
	plots = append(plots, breakdownPlots(r, s)...)
	plots = append(plots, efficiencyPlot(r, s))
	if p, ok := foldedPlot(r); ok {
		plots = append(plots, p)
	}
	if p, ok := historyPlot(r); ok {
		plots = append(plots, p)
	}
	if p, ok := responsePlot(r, s); ok {
		plots = append(plots, p)
	}
	if p, ok := correlationPlot(r, s); ok {
		plots = append(plots, p)
	}
	return plots
}

// axisLabel returns "NAME [UNIT]", or NAME without a unit.
func axisLabel(name, unit string) string {
	if unit == "" {
		return name
	}
	return name + " [" + unit + "]"
}

// scaledTo returns v scaled so that its sum over the determined
// in-range bins of s equals that of the estimate of r; nil for v nil.
func scaledTo(r *Result, s *binning.Scheme, v []float64) []float64 {
	if v == nil {
		return nil
	}
	var sv, se float64
	for g := 0; g < s.InRange(); g++ {
		if r.Determined[g] {
			sv += v[g]
			se += r.Estimate[g]
		}
	}
	k := 0.0
	if sv > 0 {
		k = se / sv
	}
	out := make([]float64, len(v))
	for g := range v {
		out[g] = k * v[g]
	}
	return out
}

// spectrumPlots returns one spectrum per slice of s.
func spectrumPlots(r *Result, s *binning.Scheme) []Plot {
	dens, densUnc := r.densities(s)
	scale := densityScale(r, s)
	sim := scaledTo(r, s, r.Generated)
	prior := scaledTo(r, s, r.Prior)
	against := "the simulation truth"
	if prior != nil {
		against += " and the prior"
	}
	var plots []Plot
	for _, sl := range Slices(s) {
		reg := s.Regions()[sl.Region]
		axes := reg.Axes()
		last := axes[len(axes)-1]
		_, units := densityLabel(r, reg)
		name := "events per bin volume"
		if r.Luminosity != 0 {
			name = "events per bin volume and luminosity"
		}
		bins := sl.Bins()
		n := len(bins)
		pts := figure.Points{Name: "unfolded", X: make([]float64, n), Y: make([]float64, n), XErr: make([]float64, n), YErr: make([]float64, n)}
		ratio := figure.Points{X: pts.X, XErr: pts.XErr, Y: make([]float64, n), YErr: make([]float64, n)}
		var steps []figure.Steps
		simY, priorY := make([]float64, n), make([]float64, n)
		lo, hi := math.Inf(1), 0.0
		for i, g := range bins {
			pts.X[i] = (sl.Edges[i] + sl.Edges[i+1]) / 2
			pts.XErr[i] = (sl.Edges[i+1] - sl.Edges[i]) / 2
			pts.Y[i], pts.YErr[i] = math.NaN(), 0
			if r.Determined[g] {
				pts.Y[i], pts.YErr[i] = dens[g], at(densUnc, g)
			}
			ratio.Y[i], ratio.YErr[i] = math.NaN(), 0
			if sim != nil {
				simY[i] = sim[g] * scale[g]
				if simY[i] > 0 && r.Determined[g] {
					ratio.Y[i], ratio.YErr[i] = pts.Y[i]/simY[i], pts.YErr[i]/simY[i]
				}
			}
			if prior != nil {
				priorY[i] = prior[g] * scale[g]
			}
			if y := pts.Y[i]; y > 0 {
				lo, hi = math.Min(lo, y), math.Max(hi, y)
			}
		}
		if sim != nil {
			steps = append(steps, figure.Steps{Name: "simulation truth (scaled)", Edges: sl.Edges, Y: simY})
		}
		if prior != nil {
			steps = append(steps, figure.Steps{Name: "prior (scaled)", Edges: sl.Edges, Y: priorY})
		}
		main := figure.Panel{YLabel: axisLabel(name, units), LogY: hi > 30*lo, Points: []figure.Points{pts}, Steps: steps}
		panels := []figure.Panel{main}
		if sim != nil {
			lo, hi := ratioRange(ratio.Y)
			panels = append(panels, figure.Panel{YLabel: "ratio to simulation", YMin: lo, YMax: hi, HLines: []float64{1}, Points: []figure.Points{ratio}})
		}
		plots = append(plots, Plot{
			Name:    "spectrum_" + reg.Name() + sl.Suffix(s),
			Caption: "Unfolded spectrum, " + sl.Name(s) + ", with its " + uncertaintyWord(r) + " uncertainty, against " + against + " scaled to the same total.",
			Figure:  &figure.Chart{Title: sl.Name(s), XLabel: axisLabel(last.Name(), last.Unit()), XMin: sl.Edges[0], XMax: sl.Edges[len(sl.Edges)-1], Panels: panels},
		})
	}
	return plots
}

// ratioRange returns the y range of a ratio panel: 0.5 to 1.5, widened
// to hold every ratio y (not every error bar), never below 0.
func ratioRange(y []float64) (lo, hi float64) {
	lo, hi = 0.5, 1.5
	for _, v := range y {
		if !math.IsNaN(v) {
			lo, hi = math.Min(lo, v-0.1), math.Max(hi, v+0.1)
		}
	}
	return math.Max(lo, 0), hi
}

// truthBounds returns the boundaries between the slices of s in global
// index, and the start of the flow bins; without a scheme, the region
// boundaries of the truth binning of r.
func truthBounds(r *Result, s *binning.Scheme) []float64 {
	if s == nil {
		return regionBounds(r.TruthBinning)
	}
	var b []float64
	for _, sl := range Slices(s) {
		if bins := sl.Bins(); len(bins) > 0 && bins[0] > 0 {
			b = append(b, float64(bins[0]))
		}
	}
	if s.InRange() < s.Len() {
		b = append(b, float64(s.InRange()))
	}
	return b
}

// regionBounds returns the global bins where a new region starts in
// the binning b; nil for none.
func regionBounds(b *Binning) []float64 {
	if b == nil {
		return nil
	}
	var out []float64
	for g := 1; g < len(b.Region); g++ {
		if b.Region[g] != b.Region[g-1] || b.Flow[g] != b.Flow[g-1] {
			out = append(out, float64(g))
		}
	}
	return out
}

// indexPoints returns points at the centres of global bins 0..n-1.
func indexPoints(name string, y, yerr []float64) figure.Points {
	n := len(y)
	p := figure.Points{Name: name, X: make([]float64, n), Y: y, XErr: make([]float64, n), YErr: yerr}
	for i := range p.X {
		p.X[i], p.XErr[i] = float64(i)+0.5, 0.5
	}
	return p
}

// efficiencyPlot shows the efficiency, purity and stability per truth
// bin (the last two from an analysis).
func efficiencyPlot(r *Result, s *binning.Scheme) Plot {
	nt := len(r.Efficiency)
	opt := func(v []*float64) []float64 {
		out := make([]float64, nt)
		for j := range out {
			out[j] = math.NaN()
			if v[j] != nil {
				out[j] = *v[j]
			}
		}
		return out
	}
	pts := []figure.Points{indexPoints("efficiency", r.Efficiency, nil)}
	if r.Purity != nil {
		pts = append(pts, indexPoints("purity", opt(r.Purity), nil), indexPoints("stability", opt(r.Stability), nil))
	}
	bounds := truthBounds(r, s)
	return Plot{
		Name:    "efficiency",
		Caption: "Efficiency, purity and stability per truth bin, in global-index order; the lines mark the slices and the flow bins.",
		Figure: &figure.Chart{Title: "Efficiency, purity and stability", XLabel: "truth bin (global index)", XMin: 0, XMax: float64(nt),
			Panels: []figure.Panel{{YLabel: "fraction", YMin: 0, YMax: 1.05, Points: pts, VLines: bounds}}},
	}
}

// foldedPlot shows the data against the folded expectation per reco
// bin, with the pulls below (only with data).
func foldedPlot(r *Result) (Plot, bool) {
	if r.Data == nil {
		return Plot{}, false
	}
	nr := len(r.Data)
	unc := make([]float64, nr)
	edges := make([]float64, nr+1)
	for i := range unc {
		unc[i] = math.Sqrt(r.PullVariance(i))
		edges[i+1] = float64(i + 1)
	}
	bounds := regionBounds(r.RecoBinning)
	return Plot{
		Name:    "folded",
		Caption: "Data per reco bin (with the square root of the variance of data and background) against the folded expectation R μ + b of the estimate, and the pulls (n − ν)/σ below.",
		Figure: &figure.Chart{Title: "Data against the folded estimate", XLabel: "reco bin (global index)", XMin: 0, XMax: float64(nr), Panels: []figure.Panel{
			{YLabel: "events", Points: []figure.Points{indexPoints("data", r.Data, unc)}, Steps: []figure.Steps{{Name: "folded estimate", Edges: edges, Y: r.Folded}}, VLines: bounds},
			{YLabel: "pull", HLines: []float64{0}, Points: []figure.Points{indexPoints("", r.Pulls(), nil)}, VLines: bounds},
		}},
	}, true
}

// historyPlot shows the chi-square and the relative change per
// iteration (with two or more steps).
func historyPlot(r *Result) (Plot, bool) {
	if len(r.History) < 2 {
		return Plot{}, false
	}
	n := len(r.History)
	x, chi2, change := make([]float64, n), make([]float64, n), make([]float64, n)
	for k, st := range r.History {
		x[k], chi2[k], change[k] = float64(st.Iteration), st.Chi2, st.Change
	}
	return Plot{
		Name:    "history",
		Caption: "Iteration history: the chi-square between successive estimates and the relative change Σ|Δμ|/Σμ (iteration 0, the start, has neither).",
		Figure: &figure.Chart{Title: "Iteration history", XLabel: "iteration", Panels: []figure.Panel{
			{YLabel: "chi-square", LogY: true, Lines: []figure.Line{{Name: "chi-square", X: x, Y: chi2}}},
			{YLabel: "change", LogY: true, Lines: []figure.Line{{X: x, Y: change}}},
		}},
	}, true
}

// responsePlot shows the response probability R_ij = A_ij / G_j (with
// the migrations known and at most MaxHeatBins bins per axis).
func responsePlot(r *Result, s *binning.Scheme) (Plot, bool) {
	m := r.Migrations
	if m == nil || r.Generated == nil {
		return Plot{}, false
	}
	nr, nt := m.Dims()
	if nr > MaxHeatBins || nt > MaxHeatBins {
		return Plot{}, false
	}
	z := make([][]float64, nr)
	for i := range z {
		z[i] = make([]float64, nt)
		for j := range z[i] {
			z[i][j] = math.NaN()
		}
	}
	ptr, row, val := m.ColPtr(), m.RowIdx(), m.Values()
	top := 0.0
	for j := 0; j < nt; j++ {
		for p := ptr[j]; p < ptr[j+1]; p++ {
			if r.Generated[j] > 0 && val[p] != 0 {
				z[row[p]][j] = val[p] / r.Generated[j]
				top = math.Max(top, z[row[p]][j])
			}
		}
	}
	xb := truthBounds(r, s)
	return Plot{
		Name:    "response",
		Caption: "Response matrix: the probability R_ij that an event of truth bin j is reconstructed in reco bin i, in global-index order; the lines mark the truth slices and flow bins and the reco regions; empty cells are white.",
		Figure: &figure.Heat{Title: "Response matrix", XLabel: "truth bin (global index)", YLabel: "reco bin (global index)", ZLabel: "probability",
			Z: z, Min: 0, Max: math.Max(top, 1e-300), XBounds: xb, YBounds: regionBounds(r.RecoBinning)},
	}, true
}

// correlationPlot shows the correlation matrix of the estimate (with a
// full covariance and at most MaxHeatBins truth bins).
func correlationPlot(r *Result, s *binning.Scheme) (Plot, bool) {
	if r.Covariance == nil || len(r.Covariance) > MaxHeatBins {
		return Plot{}, false
	}
	b := truthBounds(r, s)
	return Plot{
		Name:    "correlation",
		Caption: "Correlation matrix of the estimate (" + uncertaintyWord(r) + "), in global-index order; the lines mark the slices and the flow bins.",
		Figure: &figure.Heat{Title: "Correlation matrix", XLabel: "truth bin (global index)", YLabel: "truth bin (global index)", ZLabel: "correlation",
			Z: r.Correlation(), Min: -1, Max: 1, XBounds: b, YBounds: b},
	}, true
}

// uncertaintyWord names the uncertainty of r in captions:
// "data-statistical" with the data's source alone, "total" otherwise.
func uncertaintyWord(r *Result) string {
	if len(r.Sources) > 1 {
		return "total"
	}
	return "data-statistical"
}
