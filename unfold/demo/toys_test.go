package demo

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/analysis"
)

// BenchmarkFixedSimulationToys separates the two sources of spread of
// the demo's result: it builds the response once from one simulation
// (the demo's analysis file at 600k simulated events), then unfolds 300
// independent pseudo-data sets drawn from the same true spectrum. It
// reports, averaged over the in-range bins, the ratio of the spread of
// the estimates to the reported variance (var-ratio, 1 for a correct
// data-statistical covariance), the root mean square over the bins of
// the mean deviation from the known truth in units of the uncertainty
// (bias-rms: the bias this one simulation's statistical fluctuations
// give, plus the model dependence), and the mean chi2/ndf:
// go test ./unfold/demo -run '^$' -bench FixedSimulationToys -benchtime 1x
func BenchmarkFixedSimulationToys(b *testing.B) {
	const toys = 300
	ctx := context.Background()
	cfg := Config{Events: 600_000, Seed: 77}
	in, err := Generate(ctx, filepath.Join(b.TempDir(), "demo"), cfg, false)
	if err != nil {
		b.Fatal(err)
	}
	a, err := analysis.Load(in.Path(AnalysisFile))
	if err != nil {
		b.Fatal(err)
	}
	r, _, err := a.BuildResponse(ctx, nil)
	if err != nil {
		b.Fatal(err)
	}
	bkg, err := a.Background(ctx, r, nil)
	if err != nil {
		b.Fatal(err)
	}
	s, m, err := a.Settings()
	if err != nil {
		b.Fatal(err)
	}
	truth := in.Truth.Expected
	nin := in.Truth.Scheme.InRange()
	chunks := int(math.Ceil((cfg.dataZetons() + cfg.dataFakes()) / chunkEvents))
	reco := a.Reco
	iy, ipt := reco.AxisIndex("y"), reco.AxisIndex("pt")
	x := make([]float64, 2)
	for b.Loop() {
		mean := make([]float64, nin)
		m2 := make([]float64, nin)
		rep := make([]float64, nin)
		var chi2 float64
		for toy := range toys {
			c := Config{Events: cfg.Events, Seed: uint64(10000 + toy)}
			n := make([]float64, reco.Len())
			for k := range chunks {
				d, _ := dataChunk(c, k, chunks)
				for i := range d.len() {
					x[iy], x[ipt] = math.Abs(d.yReco[i]), d.ptReco[i]
					n[reco.Locate(x)]++
				}
			}
			p, err := a.Problem(r, &analysis.Measured{Values: n}, bkg)
			if err != nil {
				b.Fatal(err)
			}
			res, err := unfold.Unfold(ctx, p, s, m)
			if err != nil {
				b.Fatal(err)
			}
			cmp, err := Compare(in.Truth, res.Estimate, res.Uncertainty, res.Covariance)
			if err != nil {
				b.Fatal(err)
			}
			chi2 += cmp.Chi2 / float64(cmp.NDF) / toys
			for g := range nin {
				d := res.Estimate[g] - truth[g]
				mean[g] += d / toys
				m2[g] += d * d / toys
				rep[g] += res.Covariance.At(g, g) / toys
			}
		}
		var ratio, bias2 float64
		for g := range nin {
			ratio += (m2[g] - mean[g]*mean[g]) / rep[g] / float64(nin)
			bias2 += mean[g] * mean[g] / rep[g] / float64(nin)
		}
		b.ReportMetric(ratio, "var-ratio")
		b.ReportMetric(math.Sqrt(bias2), "bias-rms")
		b.ReportMetric(chi2, "chi2/ndf")
	}
	os.RemoveAll(in.Dir)
}
