package tikhonov

import (
	"context"
	"math"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// BenchmarkLCurve100k is the Tikhonov method with the L-curve scan (31
// values of tau, then the nominal solve) by conjugate gradients on
// 100,000 truth bins (a 400 × 250 grid, curvature along both axes) and
// 200,000 reco bins, a Gaussian smearing of 1.2 reco bins with 10
// non-zeros per column, Poisson-like data; no uncertainty. See
// BENCHMARKS.md.
// The "full" variants are the scan before its early end and its
// extrapolated starts (every point solved, each from the previous
// solution).
func BenchmarkLCurve100k(b *testing.B) {
	b.Run("ichol", func(b *testing.B) { benchLCurve(b, 400, 250, false, false) })
	b.Run("ichol-full", func(b *testing.B) { benchLCurve(b, 400, 250, false, true) })
}

// BenchmarkLCurve25k is the same on a 200 × 125 grid, with the
// incomplete Cholesky preconditioner and with the diagonal one.
func BenchmarkLCurve25k(b *testing.B) {
	b.Run("ichol", func(b *testing.B) { benchLCurve(b, 200, 125, false, false) })
	b.Run("ichol-full", func(b *testing.B) { benchLCurve(b, 200, 125, false, true) })
	b.Run("jacobi", func(b *testing.B) { benchLCurve(b, 200, 125, true, false) })
}

func benchLCurve(b *testing.B, nx, ny int, jacobi, full bool) {
	defer func(v, f bool) { jacobiOnly, fullScan = v, f }(jacobiOnly, fullScan)
	jacobiOnly, fullScan = jacobi, full
	x, _ := binning.NewAxis("x", "", edges(nx), false, false)
	y, _ := binning.NewAxis("y", "", edges(ny), false, false)
	r, _ := binning.NewRegion("grid", x, y)
	s, err := binning.NewScheme(r)
	if err != nil {
		b.Fatal(err)
	}
	nt := s.Len()
	a, gen := smearedResponse(b, nt, 2*nt, 1.2)
	truth := make([]float64, nt)
	for j := range truth {
		bin := s.Bin(j)
		truth[j] = 1000 * (1.2 + math.Sin(float64(bin.Index[0])/40)*math.Cos(float64(bin.Index[1])/30))
	}
	p := noisyProblem(a, gen, truth, 1)
	b.ReportMetric(float64(a.NNZ())/float64(nt), "nnz/col")
	b.ResetTimer()
	for range b.N {
		res, err := unfold.Unfold(context.Background(), p, nil, &Settings{Truth: s, Solver: SparseSolver})
		if err != nil {
			b.Fatal(err)
		}
		d := DetailsOf(res)
		scanIters, conv := 0, 0
		for _, pt := range d.Scan {
			scanIters += pt.Iterations
			if pt.Converged {
				conv++
			}
		}
		iters := d.CGIterations
		if testing.Verbose() {
			for _, pt := range d.Scan {
				b.Logf("tau %.4g res %.6g pen %.6g curv %.4g iter %d", pt.Tau, pt.ResidualNorm, pt.PenaltyNorm, pt.Curvature, pt.Iterations)
			}
		}
		b.ReportMetric(float64(scanIters), "cg-iter-scan")
		b.ReportMetric(d.Tau, "tau")
		b.ReportMetric(float64(iters), "cg-iter-nominal")
		b.ReportMetric(float64(conv), "scan-converged")
		b.ReportMetric(float64(len(d.Scan)), "scan-points")
	}
}

func edges(n int) []float64 {
	e := make([]float64, n+1)
	for i := range e {
		e[i] = float64(i)
	}
	return e
}
