package bayes

import (
	"context"
	"github.com/desmear/desmear/unfold"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/desmear/desmear/sparse"
	"gonum.org/v1/gonum/mat"
)

// randomProblem builds an invented test problem: nt truth bins, nr reco
// bins, each truth column reaching about perCol reco bins around 2j·nr/nt
// (a band), efficiencies in [0.5, 0.95], generated counts ~1e4 and data
// Poisson-like around the fold of a smooth truth. With bkg, a background
// of a few counts per reco bin. Everything is seeded.
func randomProblem(t testing.TB, seed uint64, nt, nr, perCol int, bkg bool) *unfold.Problem {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 7))
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	gen := make([]float64, nt)
	for j := 0; j < nt; j++ {
		c := j * nr / nt
		lo := max(0, c-perCol/2)
		hi := min(nr, lo+perCol)
		lo = max(0, hi-perCol)
		g := 5000 + 10000*rng.Float64()
		gen[j] = g
		eff := 0.5 + 0.45*rng.Float64()
		w := make([]float64, hi-lo)
		var s float64
		for k := range w {
			d := float64(lo+k-c) / float64(perCol)
			w[k] = math.Exp(-4*d*d) * (0.5 + rng.Float64())
			s += w[k]
		}
		for k := range w {
			rowIdx = append(rowIdx, lo+k)
			val = append(val, g*eff*w[k]/s)
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	truth := make([]float64, nt)
	for j := range truth {
		x := float64(j) / float64(nt)
		truth[j] = 200 + 800*math.Exp(-3*x)
	}
	fold := make([]float64, nr)
	scaled := make([]float64, nt)
	for j := range scaled {
		scaled[j] = truth[j] / gen[j]
	}
	a.Fold(fold, scaled)
	p := &unfold.Problem{Migrations: a, Generated: gen, Data: make([]float64, nr)}
	if bkg {
		p.Background = make([]float64, nr)
		for i := range p.Background {
			p.Background[i] = 2 + 3*rng.Float64()
		}
	}
	for i := range fold {
		mu := fold[i]
		if bkg {
			mu += p.Background[i]
		}
		p.Data[i] = math.Max(0, math.Round(mu+math.Sqrt(mu)*rng.NormFloat64()))
	}
	return p
}

// denseR returns R = A/G as a gonum dense matrix.
func denseR(a *sparse.Matrix, gen []float64) *mat.Dense {
	nr, nt := a.Dims()
	r := mat.NewDense(nr, nt, nil)
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	for j := 0; j < nt; j++ {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			r.Set(rowIdx[k], j, val[k]/gen[j])
		}
	}
	return r
}

// jacobianOf runs the iteration of p under s carrying the dense Jacobian
// and returns it with the result.
func jacobianOf(t testing.TB, p *unfold.Problem, s *opts) (*jacobian, *unfold.Result) {
	t.Helper()
	rs, err := s.resolve()
	if err != nil {
		t.Fatal(err)
	}
	m, err := prepare(p, s.Background)
	if err != nil {
		t.Fatal(err)
	}
	var sm *smoother
	if rs.Smoothing != nil {
		if sm, err = newSmoother(rs.Smoothing, m.det); err != nil {
			t.Fatal(err)
		}
	}
	jc := newJacobian(m, unfold.NewJacobian(m.p))
	it := newIterator(m, sm)
	d, err := it.run(context.Background(), m.n, rs, jc)
	if err != nil {
		t.Fatal(err)
	}
	return jc, &unfold.Result{Estimate: it.mu, Folded: it.nu, Efficiency: m.eps, Determined: m.det, Details: d}
}

func (jc *jacobian) at(r, c int) float64 { return jc.j[r*jc.cols+c] }

func maxRelDiff(a, b []float64) float64 {
	var d float64
	for i := range a {
		d = math.Max(d, math.Abs(a[i]-b[i])/math.Max(1e-300, math.Max(math.Abs(a[i]), math.Abs(b[i]))))
	}
	return d
}

// opts gathers the common and the method's settings of a test.
type opts struct {
	Iterations     int
	StopChi2       float64
	MaxIterations  int
	Smoothing      *Smoothing
	Background     unfold.BackgroundMode
	Covariance     unfold.CovarianceMode
	DiagonalMethod unfold.DiagonalMethod
	Probes, Toys   int
	Seed           uint64
	MemoryLimit    int64
}

// split returns the common settings and the method of o (nil: defaults).
func (o *opts) split() (*unfold.Settings, *Settings) {
	if o == nil {
		return nil, nil
	}
	return &unfold.Settings{Background: o.Background, Covariance: o.Covariance, DiagonalMethod: o.DiagonalMethod,
			Probes: o.Probes, Toys: o.Toys, Seed: o.Seed, MemoryLimit: o.MemoryLimit},
		&Settings{Iterations: o.Iterations, StopChi2: o.StopChi2, MaxIterations: o.MaxIterations, Smoothing: o.Smoothing}
}

// resolve resolves the method's settings of o.
func (o *opts) resolve() (*resolved, error) {
	_, m := o.split()
	return m.resolve()
}

// unfoldWith unfolds p with the settings of o by the iterative method.
func unfoldWith(ctx context.Context, p *unfold.Problem, o *opts) (*unfold.Result, error) {
	s, m := o.split()
	return unfold.Unfold(ctx, p, s, m)
}

// details returns the iteration details of res.
func details(res *unfold.Result) *Details { return DetailsOf(res) }

// prepare prepares p for mode and returns the iteration's model of it.
func prepare(p *unfold.Problem, mode unfold.BackgroundMode) (*model, error) {
	pr, err := unfold.Prepare(p, mode)
	if err != nil {
		return nil, err
	}
	return newModel(pr), nil
}
