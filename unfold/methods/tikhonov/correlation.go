package tikhonov

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
)

// globalCorrelation gives the average global correlation of the
// estimate for any tau from one decomposition (method.md §14 Choosing
// tau). With F = Rᵀ W R = Uᵀ U (Cholesky) and the eigen-decomposition
// U⁻ᵀ Lᵀ L U⁻¹ = Q Λ Qᵀ, the normal matrix is M = B D Bᵀ with B = Uᵀ Q
// and D = 1 + τ² Λ, the covariance of the estimate
// C = M⁻¹ F M⁻¹ = E D⁻² Eᵀ with E = U⁻¹ Q, and C⁻¹ = B D² Bᵀ, so that
// C_jj = Σ_k E_jk² / D_k² and (C⁻¹)_jj = Σ_k B_jk² D_k².
type globalCorrelation struct {
	lambda []float64
	e2, b2 *mat.Dense // E and B squared element-wise
}

func newGlobalCorrelation(d *dense) (*globalCorrelation, error) {
	m := len(d.idx)
	var ch mat.Cholesky
	if !ch.Factorize(d.f) {
		return nil, &unfold.SettingsError{Field: "Criterion", Reason: "the global correlation needs a covariance that the response alone determines (Rᵀ V⁻¹ R invertible: at least as many reco bins as truth bins, every truth bin measured independently); choose the L-curve or a fixed tau"}
	}
	var u mat.TriDense
	ch.UTo(&u)
	var ui mat.TriDense
	if err := ui.InverseTri(&u); err != nil {
		return nil, &unfold.NumericalError{Reason: "the global correlation: " + err.Error()}
	}
	om := mat.NewSymDense(m, nil)
	d.addPenalty(om, 1)
	var t, w mat.Dense
	t.Mul(om, &ui)
	w.Mul(ui.T(), &t)
	ws := mat.NewSymDense(m, nil)
	for i := 0; i < m; i++ {
		for j := i; j < m; j++ {
			ws.SetSym(i, j, (w.At(i, j)+w.At(j, i))/2)
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(ws, true) {
		return nil, &unfold.NumericalError{Reason: "the global correlation: the eigen-decomposition of the penalty did not converge"}
	}
	var q mat.Dense
	eig.VectorsTo(&q)
	gc := &globalCorrelation{lambda: eig.Values(nil), e2: mat.NewDense(m, m, nil), b2: mat.NewDense(m, m, nil)}
	gc.e2.Mul(&ui, &q)
	gc.b2.Mul(u.T(), &q)
	square := func(_, _ int, v float64) float64 { return v * v }
	gc.e2.Apply(square, gc.e2)
	gc.b2.Apply(square, gc.b2)
	return gc, nil
}

// average returns the mean of ρ_j = sqrt(1 − 1/(C_jj (C⁻¹)_jj)) over the
// determined bins at tau.
func (gc *globalCorrelation) average(tau float64) float64 {
	m := len(gc.lambda)
	d2 := make([]float64, m)
	for k, l := range gc.lambda {
		d := 1 + tau*tau*math.Max(l, 0)
		d2[k] = d * d
	}
	var sum float64
	for j := 0; j < m; j++ {
		var c, ci float64
		for k := 0; k < m; k++ {
			c += gc.e2.At(j, k) / d2[k]
			ci += gc.b2.At(j, k) * d2[k]
		}
		sum += rho(c, ci)
	}
	return sum / float64(m)
}

// rho returns sqrt(1 − 1/(c ci)) for the variance c and the diagonal
// element ci of the inverse covariance, 0 where rounding makes c ci < 1.
func rho(c, ci float64) float64 {
	return math.Sqrt(math.Max(0, 1-1/(c*ci)))
}

// GlobalCorrelations returns ρ_j = sqrt(1 − 1/(C_jj (C⁻¹)_jj)) of the
// covariance c (F. James, Statistical Methods in Experimental Physics,
// 2nd ed., World Scientific 2006, §4.2.2 from memory; method.md §14
// Choosing tau). It returns an error when c is not positive definite.
func GlobalCorrelations(c *mat.SymDense) ([]float64, error) {
	var ch mat.Cholesky
	if !ch.Factorize(c) {
		return nil, &unfold.NumericalError{Reason: "the global correlation needs a positive definite covariance"}
	}
	var inv mat.SymDense
	if err := ch.InverseTo(&inv); err != nil {
		return nil, &unfold.NumericalError{Reason: "the global correlation: " + err.Error()}
	}
	out := make([]float64, c.SymmetricDim())
	for j := range out {
		out[j] = rho(c.At(j, j), inv.At(j, j))
	}
	return out, nil
}
