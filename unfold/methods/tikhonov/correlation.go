package tikhonov

import (
	"context"
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

// CorrelationSample is the number of truth bins over which the average
// global correlation is estimated above CorrelationLimit.
const CorrelationSample = 32

// sampledCorrelation estimates the average global correlation of large
// problems from a sample of the determined bins (method.md §14). With
// M = Rᵀ W R, G = Lᵀ L and H = M + τ² G the normal matrix, the covariance
// of the estimate is C = H⁻¹ M H⁻¹ and its inverse C⁻¹ = H M⁻¹ H, so
//
//	C_jj = |W^½ R u_j|²  with H u_j = e_j,
//	(C⁻¹)_jj = M_jj + 2τ² G_jj + τ⁴ g_jᵀ M⁻¹ g_j  with g_j = G e_j:
//
// one solve with M per sampled bin (independent of τ) and one solve with
// H per sampled bin and value of τ. The sample is systematic: every
// (determined bins / CorrelationSample)-th determined bin, the same at
// every τ, so that the curve is smooth in τ.
type sampledCorrelation struct {
	e    *engine
	bins []int
	q    []float64   // g_jᵀ M⁻¹ g_j
	u    [][]float64 // the solutions at the last τ, the warm starts of the next
}

func newSampledCorrelation(ctx context.Context, e *engine, c *cg) (*sampledCorrelation, error) {
	sy := e.sy
	var det []int
	for j, ok := range sy.p.Determined() {
		if ok {
			det = append(det, j)
		}
	}
	n := min(CorrelationSample, len(det))
	sc := &sampledCorrelation{e: e}
	for k := range n {
		sc.bins = append(sc.bins, det[k*len(det)/n])
	}
	if err := e.prepare(0); err != nil {
		return nil, err
	}
	g, v := make([]float64, sy.nt), make([]float64, sy.nt)
	lx := make([]float64, sy.l.rows())
	ej := make([]float64, sy.nt)
	for _, j := range sc.bins {
		clear(g)
		clear(v)
		ej[j] = 1
		sy.l.addNormal(g, ej, lx, 1)
		ej[j] = 0
		ok, err := e.solve(ctx, c, v, g, 0, false)
		if err != nil {
			return nil, err
		}
		if !ok {
			return nil, &unfold.SettingsError{Field: "Criterion", Reason: "the global correlation needs a covariance that the response alone determines (Rᵀ V⁻¹ R invertible: the unregularised solve did not converge); choose the L-curve or a fixed tau"}
		}
		sc.q = append(sc.q, dot(g, v))
		sc.u = append(sc.u, make([]float64, sy.nt))
	}
	return sc, nil
}

// average returns the sample mean of ρ_j at tau (after e.prepare(tau))
// and its standard error, with c as the solver's scratch.
func (sc *sampledCorrelation) average(ctx context.Context, c *cg, tau float64) (mean, se float64, err error) {
	sy := sc.e.sy
	ej := make([]float64, sy.nt)
	fold := make([]float64, sy.p.RecoBins())
	t2 := tau * tau
	var sum, sum2 float64
	for k, j := range sc.bins {
		ej[j] = 1
		_, err := sc.e.solve(ctx, c, sc.u[k], ej, tau, false)
		ej[j] = 0
		if err != nil {
			return 0, 0, err
		}
		sy.p.Fold(fold, sc.u[k], c.tmp)
		var cjj float64
		for i, f := range fold {
			cjj += sy.w[i] * f * f
		}
		ci := sy.fd[j] + 2*t2*sy.ld[j] + t2*t2*sc.q[k]
		r := rho(cjj, ci)
		sum += r
		sum2 += r * r
	}
	n := float64(len(sc.bins))
	mean = sum / n
	if n > 1 {
		se = math.Sqrt(math.Max(0, (sum2-n*mean*mean)/(n-1)) / n)
	}
	return mean, se, nil
}
