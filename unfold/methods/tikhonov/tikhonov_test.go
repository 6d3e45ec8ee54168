package tikhonov

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// linearTruth returns a truth on scheme s that every penalty row
// annihilates: per region, bilinear in the bin numbers of a rectangular
// region (x = c0 + c1 a + c2 b + c3 a b, and on in a third axis), and in
// a region with edges by bin linear in the bin number along the
// edges-by-bin axis within each slice. With widths the content is
// V_j f(centre_j), f multilinear in the variables (the integral of f
// over the bin, exact for a multilinear f). Flow bins get 50.
func linearTruth(s *binning.Scheme, widths bool) []float64 {
	x := make([]float64, s.Len())
	for g := range x {
		b := s.Bin(g)
		if b.Flow {
			x[g] = 50
			continue
		}
		f, c := 300.0+40*float64(b.Region), 1.0
		for k := range b.Index {
			v := float64(b.Index[k])
			if widths {
				v = (b.Low[k] + b.High[k]) / 2
			}
			c *= 1 + 0.1*float64(k+1)*v
		}
		f *= c
		if widths {
			f *= b.Volume
		}
		x[g] = f
	}
	return x
}

// The curvature-regularised solution of noise-free data n = R x + b
// from a truth the penalty annihilates is the truth for any tau, with
// x0 = 0: the residual is zero and the penalty vanishes (exact property,
// method.md §13 Tikhonov regularisation). With widths the same holds for a
// truth multilinear in the variables. Both solvers, tau from 1e-3 to 100 times
// the scale (at 1000 times the scale the dense Cholesky of the
// ill-conditioned normal matrix keeps only about 5 digits).
func TestExactOnLinearTruth(t *testing.T) {
	for _, c := range []struct {
		name   string
		s      *binning.Scheme
		widths bool
	}{
		{"2d grid", gridScheme(t, []float64{0, 1, 2, 3, 4, 5}, []float64{0, 1, 2, 3, 4, 5, 6}), false},
		{"2d grid widths", gridScheme(t, []float64{0, 0.5, 2, 3, 5}, []float64{10, 12, 20, 25, 40, 41}), true},
		{"3d grid", gridScheme(t, []float64{0, 1, 2, 3, 4}, []float64{0, 1, 2, 3}, []float64{0, 1, 2, 3, 4}), false},
		{"edges by bin", readScheme(t, "scheme2d.yaml"), false},
		{"3d edges by bin widths", readScheme(t, "scheme3d.yaml"), true},
	} {
		nt := c.s.Len()
		a, gen := randomResponse(t, 1, nt, 2*nt, 5, 2)
		truth := linearTruth(c.s, c.widths)
		truth[2] = 0 // undetermined
		b := make([]float64, 2*nt)
		for i := range b {
			b[i] = 3
		}
		p := foldedProblem(a, gen, truth, b)
		for _, dense := range []bool{true, false} {
			for _, f := range []float64{1e-3, 1, 100} {
				m := &Settings{Truth: c.s, Widths: c.widths, Solver: solverOf(dense), Tolerance: 1e-14}
				pr, err := unfold.Prepare(p, unfold.InModel)
				if err != nil {
					t.Fatal(err)
				}
				l, _ := newPenalty(c.s, nt, pr.Determined(), Curvature, c.widths)
				m.Tau = f * newSystem(pr, l, nil, 1e-12, 0).scale()
				res, err := unfold.Unfold(context.Background(), p, nil, m)
				if err != nil {
					t.Fatalf("%s dense=%v tau=%g: %v", c.name, dense, m.Tau, err)
				}
				if d := relDiff(res.Estimate, truth); d > 1e-7 {
					t.Errorf("%s dense=%v tau factor %g: estimate differs from the truth by %.3g relative", c.name, dense, f, d)
				}
				if pen := DetailsOf(res).PenaltyNorm; pen > 1e-6 {
					t.Errorf("%s: penalty %g on a linear truth", c.name, pen)
				}
			}
		}
	}
}

// denseReference solves the same normal equations with gonum's general
// dense solver (LU), independently of the method's Cholesky: M over the
// determined bins from the dense R, W and the rows of L.
func denseReference(t *testing.T, p *unfold.Prepared, l *penalty, tau float64, y []float64) []float64 {
	t.Helper()
	nt, nr := p.TruthBins(), p.RecoBins()
	ad, err := p.Migrations().ToDense()
	if err != nil {
		t.Fatal(err)
	}
	w := p.Weights()
	var idx []int
	for j, d := range p.Determined() {
		if d {
			idx = append(idx, j)
		}
	}
	m := len(idx)
	rw := mat.NewDense(nr, m, nil)
	for c, j := range idx {
		for i := 0; i < nr; i++ {
			rw.Set(i, c, ad.At(i, j)*p.InvGenerated()[j])
		}
	}
	wd := mat.NewDiagDense(nr, w)
	var wr, mm mat.Dense
	wr.Mul(wd, rw)
	mm.Mul(rw.T(), &wr)
	ld := mat.NewDense(l.rows(), nt, nil)
	for r := 0; r < l.rows(); r++ {
		for k := r * l.width; k < (r+1)*l.width; k++ {
			ld.Set(r, l.idx[k], ld.At(r, l.idx[k])+l.coef[k])
		}
	}
	var ltl mat.Dense
	ltl.Mul(ld.T(), ld)
	for a, ja := range idx {
		for b, jb := range idx {
			mm.Set(a, b, mm.At(a, b)+tau*tau*ltl.At(ja, jb))
		}
	}
	rhs := mat.NewVecDense(m, nil)
	rhs.MulVec(wr.T(), mat.NewVecDense(nr, y))
	var x mat.VecDense
	if err := x.SolveVec(&mm, rhs); err != nil {
		t.Fatal(err)
	}
	out := make([]float64, nt)
	for c, j := range idx {
		out[j] = x.AtVec(c)
	}
	return out
}

// The sparse conjugate gradients (with the incomplete Cholesky and with
// the diagonal preconditioner) agree with a dense gonum solve of the
// same normal equations to 1e-8 relative, on random problems with 2-D
// and 3-D binnings, edges-by-bin slices, flow bins, an undetermined bin,
// both penalties, with and without widths (gonum LU as the reference).
func TestSparseMatchesDense(t *testing.T) {
	for _, c := range []struct {
		name    string
		s       *binning.Scheme
		penalty Penalty
		widths  bool
	}{
		{"2d edges by bin", readScheme(t, "scheme2d.yaml"), Curvature, false},
		{"2d edges by bin slope widths", readScheme(t, "scheme2d.yaml"), Slope, true},
		{"3d edges by bin", readScheme(t, "scheme3d.yaml"), Curvature, true},
		{"3d grid", gridScheme(t, []float64{0, 1, 2, 3, 4}, []float64{0, 1, 2, 3, 5}, []float64{0, 2, 3, 4}), Curvature, false},
		{"global index", nil, Curvature, false},
	} {
		nt := 40
		if c.s != nil {
			nt = c.s.Len()
		}
		a, gen := randomResponse(t, 7, nt, 3*nt/2, 6, 1)
		truth := make([]float64, nt)
		for j := range truth {
			truth[j] = 500 + 300*math.Sin(float64(j))
		}
		p := noisyProblem(a, gen, truth, 5)
		pr, err := unfold.Prepare(p, unfold.InModel)
		if err != nil {
			t.Fatal(err)
		}
		l, err := newPenalty(c.s, nt, pr.Determined(), c.penalty, c.widths)
		if err != nil {
			t.Fatal(err)
		}
		tau := 0.1 * newSystem(pr, l, nil, 1e-12, 0).scale()
		want := denseReference(t, pr, l, tau, pr.Data())
		for _, v := range []struct{ dense, jacobi bool }{{false, false}, {false, true}, {true, false}} {
			dense := v.dense
			jacobiOnly = v.jacobi
			m := &Settings{Tau: tau, Truth: c.s, Penalty: c.penalty, Widths: c.widths, Solver: solverOf(dense), Tolerance: 1e-13}
			res, err := unfold.Unfold(context.Background(), p, nil, m)
			jacobiOnly = false
			if err != nil {
				t.Fatalf("%s: %v", c.name, err)
			}
			if d := relDiff(res.Estimate, want); d > 1e-8 {
				t.Errorf("%s dense=%v jacobi=%v: differs from gonum LU by %.3g relative", c.name, dense, v.jacobi, d)
			}
			if !dense && DetailsOf(res).CGIterations == 0 {
				t.Errorf("%s: no conjugate-gradient iterations recorded", c.name)
			}
		}
	}
}

func solverOf(dense bool) Solver {
	if dense {
		return DenseSolver
	}
	return SparseSolver
}

// The penalty rows of the shared 2-D test binning, counted by hand
// (method.md §13 Tikhonov regularisation): the central region has pt
// slices of 4, 3 and 2 bins and no rows along y (pt has edges by y bin),
// so 2 + 1 + 0 curvature rows and 3 + 2 + 1 slope rows; the forward
// region is 2 × 2, with no curvature rows and 2 + 2 slope rows. No row
// touches a flow bin or the undetermined bin 0.
func TestPenaltyRows(t *testing.T) {
	s := readScheme(t, "scheme2d.yaml")
	det := make([]bool, s.Len())
	for j := range det {
		det[j] = true
	}
	for _, c := range []struct {
		kind      Penalty
		want      int
		wantUndet int
	}{{Curvature, 3, 2}, {Slope, 10, 9}} {
		l, err := newPenalty(s, s.Len(), det, c.kind, false)
		if err != nil {
			t.Fatal(err)
		}
		if l.rows() != c.want {
			t.Errorf("%v: %d rows, want %d", c.kind, l.rows(), c.want)
		}
		for _, j := range l.idx {
			if j >= s.InRange() {
				t.Errorf("%v: a row touches flow bin %d", c.kind, j)
			}
		}
		det[0] = false
		if l, _ = newPenalty(s, s.Len(), det, c.kind, false); l.rows() != c.wantUndet {
			t.Errorf("%v with bin 0 undetermined: %d rows, want %d", c.kind, l.rows(), c.wantUndet)
		}
		det[0] = true
	}
}
