package tikhonov

import (
	"context"
	"math"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// The global correlation of a 2×2 covariance [[a, c], [c, b]] is
// |ρ| = |c|/sqrt(a b) for both bins (closed form, derived here: the
// inverse has diagonal b/(ab − c²) and a/(ab − c²), so
// 1 − 1/(V_11 (V⁻¹)_11) = c²/(ab)).
func TestGlobalCorrelation2x2(t *testing.T) {
	for _, c := range [][3]float64{{4, 9, -3}, {1, 1, 0.5}, {2, 8, 0}, {3625, 3625, -0.724138 * 3625}} {
		g, err := GlobalCorrelations(mat.NewSymDense(2, []float64{c[0], c[2], c[2], c[1]}))
		if err != nil {
			t.Fatal(err)
		}
		want := math.Abs(c[2]) / math.Sqrt(c[0]*c[1])
		for j, v := range g {
			if math.Abs(v-want) > 1e-12 {
				t.Errorf("%v: rho[%d] = %v, want %v", c, j, v, want)
			}
		}
	}
}

// The average global correlation from one decomposition (method.md §14
// Choosing tau) equals the direct computation from the covariance
// C = K W⁻¹ Kᵀ with K from gonum's LU solve, at several taus.
func TestAverageCorrelation(t *testing.T) {
	nt, nr := 10, 16
	a, gen := randomResponse(t, 5, nt, nr, 4)
	truth := make([]float64, nt)
	for j := range truth {
		truth[j] = 500 + 50*float64(j)
	}
	p := noisyProblem(a, gen, truth, 2)
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	l, _ := newPenalty(nil, nt, pr.Determined(), Curvature, false)
	sy := newSystem(pr, l, nil, 1e-12, 0)
	gc, err := newGlobalCorrelation(newDense(sy))
	if err != nil {
		t.Fatal(err)
	}
	// The estimate of large problems (§14), here over all 10 bins (fewer
	// than CorrelationSample), by conjugate gradients and densely.
	type sampled struct {
		e  *engine
		c  *cg
		sc *sampledCorrelation
	}
	var samplers []sampled
	for _, dense := range []bool{false, true} {
		e := newEngine(sy, dense)
		c := newCG(sy)
		sc, err := newSampledCorrelation(context.Background(), e, c)
		if err != nil {
			t.Fatal(err)
		}
		if len(sc.bins) != nt {
			t.Fatalf("sample of %d bins, want all %d", len(sc.bins), nt)
		}
		samplers = append(samplers, sampled{e, c, sc})
	}
	for _, f := range []float64{1e-3, 0.1, 3} {
		tau := f * sy.scale()
		k := mat.NewDense(nt, nr, nil)
		for i := 0; i < nr; i++ {
			e := make([]float64, nr)
			e[i] = 1
			k.SetCol(i, denseReference(t, pr, l, tau, e))
		}
		var kv mat.Dense
		kv.Mul(k, mat.NewDiagDense(nr, pr.DataVariance()))
		var c mat.Dense
		c.Mul(&kv, k.T())
		cs := mat.NewSymDense(nt, nil)
		for i := 0; i < nt; i++ {
			for j := i; j < nt; j++ {
				cs.SetSym(i, j, (c.At(i, j)+c.At(j, i))/2)
			}
		}
		rho, err := GlobalCorrelations(cs)
		if err != nil {
			t.Fatal(err)
		}
		var want float64
		for _, r := range rho {
			want += r / float64(nt)
		}
		if got := gc.average(tau); math.Abs(got-want) > 1e-6 {
			t.Errorf("tau %g: average global correlation %v, want %v", tau, got, want)
		}
		for k, sm := range samplers {
			if err := sm.e.prepare(tau); err != nil {
				t.Fatal(err)
			}
			got, se, err := sm.sc.average(context.Background(), sm.c, tau)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(got-want) > 1e-6 || !(se > 0) {
				t.Errorf("tau %g, sampled estimate (dense %v): %v ± %v, want %v", tau, k == 1, got, se, want)
			}
		}
	}
}

// The curvature of points on a circle of radius r, traversed
// counter-clockwise, is 1/r (closed form); central differences on a
// fine grid give it to O(h²).
func TestCurvatureOfCircle(t *testing.T) {
	const r, k = 2.0, 201
	s := make([]ScanPoint, k)
	for i := range s {
		th := -1 + 2*float64(i)/float64(k-1) // log10 tau
		s[i] = ScanPoint{Tau: math.Pow(10, th), ResidualNorm: math.Pow(10, r*math.Cos(th)), PenaltyNorm: math.Pow(10, r*math.Sin(th))}
	}
	usable := curvatures(s)
	for i := 1; i < k-1; i++ {
		if !usable[i] {
			t.Fatalf("point %d not usable", i)
		}
		if math.Abs(s[i].Curvature-1/r) > 1e-3 {
			t.Fatalf("point %d: curvature %v, want %v", i, s[i].Curvature, 1/r)
		}
	}
	if s[0].Curvature != 0 || s[k-1].Curvature != 0 {
		t.Error("curvature set at the ends of the scan")
	}
}

// On a noisy problem with a smeared response the L-curve corner lies inside the scan, the
// residual norm grows and the penalty norm falls with tau (Hansen and
// O'Leary 1993, the monotonicity of both norms along the L-curve), the
// chosen tau is the scan point of largest curvature, and the
// correlation criterion chooses the scan point of smallest average
// global correlation.
func TestScan(t *testing.T) {
	nt := 40
	a, gen := smearedResponse(t, nt, 60, 2.5)
	truth := make([]float64, nt)
	for j := range truth {
		truth[j] = 1000 + 800*math.Sin(float64(j)/5)
	}
	p := noisyProblem(a, gen, truth, 4)
	for _, crit := range Criteria() {
		res, err := unfold.Unfold(context.Background(), p, nil, &Settings{Criterion: crit})
		if err != nil {
			t.Fatal(err)
		}
		d := DetailsOf(res)
		if len(d.Scan) != DefaultScanPoints || d.Criterion != crit.String() {
			t.Fatalf("%v: %d scan points, criterion %q", crit, len(d.Scan), d.Criterion)
		}
		best := 0
		for k, pt := range d.Scan {
			if k > 0 && (pt.ResidualNorm < d.Scan[k-1].ResidualNorm*(1-1e-9) || pt.PenaltyNorm > d.Scan[k-1].PenaltyNorm*(1+1e-9)) {
				t.Errorf("%v: point %d not monotone: %+v after %+v", crit, k, pt, d.Scan[k-1])
			}
			if crit == LCurve && pt.Curvature > d.Scan[best].Curvature || crit == Correlation && pt.Correlation < d.Scan[best].Correlation {
				best = k
			}
		}
		if d.Tau != d.Scan[best].Tau {
			t.Errorf("%v: chose tau %v, the best scan point is %v", crit, d.Tau, d.Scan[best].Tau)
		}
		if d.AtScanEdge {
			t.Errorf("%v: the chosen tau %v is at the edge of the scan", crit, d.Tau)
		}
	}
}

// The L-curve scan by conjugate gradients, which ends once the corner is
// bracketed (method.md §14 Choosing tau), chooses the same tau as the
// full scan of gonum's dense Cholesky solve, on smeared problems in one
// and two dimensions whose corner lies inside the scan; the points it
// solves near the corner have the dense norms (to the scan's tolerance),
// and it stops before the end of the scan except where the chosen point
// is too slow for ExtentMargin. (With ExtentMargin 1 the "1d wide" case
// stops early and chooses a point the full scan finds still.)
func TestScanEndsAtBracketedCorner(t *testing.T) {
	for _, c := range []struct {
		name   string
		nx, ny int
		sigma  float64
		seed   uint64
		ends   bool
	}{
		{"1d", 60, 0, 2.5, 4, true},
		{"1d wide", 80, 0, 4, 9, false}, // the corner point moves too slowly to end early
		{"2d", 16, 10, 1.5, 3, true},
		{"2d fine", 30, 20, 2, 2, true},
	} {
		var s *binning.Scheme
		nt := c.nx
		if c.ny > 0 {
			x, _ := binning.NewAxis("x", "", edges(c.nx), false, false)
			y, _ := binning.NewAxis("y", "", edges(c.ny), false, false)
			r, _ := binning.NewRegion("grid", x, y)
			var err error
			if s, err = binning.NewScheme(r); err != nil {
				t.Fatal(err)
			}
			nt = s.Len()
		}
		a, gen := smearedResponse(t, nt, 2*nt, c.sigma)
		truth := make([]float64, nt)
		for j := range truth {
			truth[j] = 1000 * (1.2 + math.Sin(float64(j%max(c.nx, 1))/7)*math.Cos(float64(j/max(c.nx, 1))/5))
		}
		p := noisyProblem(a, gen, truth, c.seed)
		var got [2]*Details
		for k, solver := range []Solver{DenseSolver, SparseSolver} {
			res, err := unfold.Unfold(context.Background(), p, nil, &Settings{Truth: s, Solver: solver})
			if err != nil {
				t.Fatalf("%s: %v", c.name, err)
			}
			got[k] = DetailsOf(res)
		}
		full, cg := got[0], got[1]
		if len(full.Scan) != DefaultScanPoints || full.AtScanEdge {
			t.Fatalf("%s: the dense scan has %d points, corner at the edge %v", c.name, len(full.Scan), full.AtScanEdge)
		}
		if cg.Tau != full.Tau {
			t.Errorf("%s: tau %v by conjugate gradients, %v by the full dense scan", c.name, cg.Tau, full.Tau)
		}
		if ends := len(cg.Scan) < len(full.Scan); ends != c.ends {
			t.Errorf("%s: the scan by conjugate gradients has %d points, ends early %v, want %v", c.name, len(cg.Scan), ends, c.ends)
		}
		// Near the corner (at the smallest taus the warm starts already
		// meet the scan's tolerance and the penalty norm is less precise).
		first := slices.Index(full.Scan, *scanPointAt(full, full.Tau)) - 2
		for k, pt := range cg.Scan[first:] {
			k += first
			ref := full.Scan[k]
			if pt.Tau != ref.Tau || math.Abs(pt.ResidualNorm/ref.ResidualNorm-1) > 1e-5 || math.Abs(pt.PenaltyNorm/ref.PenaltyNorm-1) > 1e-4 {
				t.Errorf("%s point %d: %+v, dense %+v", c.name, k, pt, ref)
			}
		}
	}
}

func scanPointAt(d *Details, tau float64) *ScanPoint {
	for k := range d.Scan {
		if d.Scan[k].Tau == tau {
			return &d.Scan[k]
		}
	}
	return nil
}
