// Package inversion is unregularised least-squares unfolding behind the
// seam of package unfold, to show what no regularisation does:
//
//	x = (Rᵀ V⁻¹ R)⁻¹ Rᵀ V⁻¹ (n − b)
//
// over the determined truth bins, with V diagonal from the data
// variances (a bin without variance gets 1), solved densely with gonum
// (a Cholesky factorisation). With as many reco bins as truth bins it
// is the matrix inversion x = R⁻¹ (n − b). The estimate is linear in
// the data, so its Jacobian is exact (unfold.NewLinearFit). The details
// report the condition number of R (cmd/desmear/help/method.md §15
// Inversion and bin-by-bin factors).
package inversion

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
)

// Name is the method's name in unfold.Result.Method and in the method
// choice of the analysis file and the command line.
const Name = "inversion"

// Limit is the largest number of determined truth bins the dense
// solve accepts.
const Limit = 3000

// Settings are the settings of the inversion (it has none);
// *Settings is the method (unfold.Method).
type Settings struct{}

// Details are what an inversion reports besides the estimate.
type Details struct {
	// Condition is the condition number of R over the determined truth
	// bins, σ_max / σ_min of its singular values (+Inf when singular,
	// which is refused).
	Condition float64
}

// DetailsOf returns the details of a result of this method, or nil.
func DetailsOf(r *unfold.Result) *Details {
	d, _ := r.Details.(*Details)
	return d
}

// Name returns the method's name.
func (s *Settings) Name() string { return Name }

// Validate checks the settings (there are none to check).
func (s *Settings) Validate() error { return nil }

// Fit solves the least squares on p.
func (s *Settings) Fit(ctx context.Context, p *unfold.Prepared) (unfold.Fit, error) {
	var idx []int
	for j, d := range p.Determined() {
		if d {
			idx = append(idx, j)
		}
	}
	m, nr := len(idx), p.RecoBins()
	if m > Limit {
		return nil, &unfold.SettingsError{Field: "Method", Reason: fmt.Sprintf("the inversion is dense and limited to %d determined truth bins (this problem has %d); use a regularised method", Limit, m)}
	}
	if m > nr {
		return nil, &unfold.NumericalError{Reason: fmt.Sprintf("the inversion needs at least as many reco bins as determined truth bins (%d reco, %d truth): the least squares have no unique solution", nr, m)}
	}
	w := p.Weights()
	r := mat.NewDense(nr, m, nil)
	a := p.Migrations()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	for c, j := range idx {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			r.Set(rowIdx[k], c, val[k]*p.InvGenerated()[j])
		}
	}
	var svd mat.SVD
	if !svd.Factorize(r, mat.SVDNone) {
		return nil, &unfold.NumericalError{Reason: "the inversion: the singular value decomposition of the response did not converge"}
	}
	sv := svd.Values(nil)
	d := &Details{Condition: math.Inf(1)}
	if sv[len(sv)-1] > 0 {
		d.Condition = sv[0] / sv[len(sv)-1]
	}
	if d.Condition > 1e15 {
		return nil, &unfold.NumericalError{Reason: fmt.Sprintf("the inversion: the response is singular (condition number %.3g): some combination of truth bins is not measured; use a regularised method", d.Condition)}
	}
	// K = (Rᵀ W R)⁻¹ Rᵀ W; the solvers share the factorisation.
	wr := mat.NewDense(nr, m, nil)
	wr.Apply(func(i, _ int, v float64) float64 { return v * w[i] }, r)
	f := mat.NewSymDense(m, nil)
	var rtwr mat.Dense
	rtwr.Mul(r.T(), wr)
	for i := 0; i < m; i++ {
		for j := i; j < m; j++ {
			f.SetSym(i, j, rtwr.At(i, j))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(f) {
		return nil, &unfold.NumericalError{Reason: "the inversion: Rᵀ V⁻¹ R is not positive definite; use a regularised method"}
	}
	newSolver := func() unfold.Solver {
		return &solver{idx: idx, wr: wr, ch: &ch, b: mat.NewVecDense(m, nil)}
	}
	return unfold.NewLinearFit(ctx, p, newSolver, nil, d)
}

// solver is K y = (Rᵀ W R)⁻¹ Rᵀ W y.
type solver struct {
	idx []int
	wr  *mat.Dense
	ch  *mat.Cholesky
	b   *mat.VecDense
	x   mat.VecDense
}

func (s *solver) Solve(ctx context.Context, dst, y []float64) error {
	s.b.MulVec(s.wr.T(), mat.NewVecDense(len(y), y))
	if err := s.ch.SolveVecTo(&s.x, s.b); err != nil {
		return &unfold.NumericalError{Reason: "the inversion: " + err.Error()}
	}
	clear(dst)
	for c, j := range s.idx {
		dst[j] = s.x.AtVec(c)
	}
	return nil
}
