package demo

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Row is one in-range truth bin of a Comparison.
type Row struct {
	Bin         int     // global truth bin
	Label       string  // the binning's label of the bin
	Truth       float64 // known truth (Truth.Expected)
	Unfolded    float64 // the unfolded estimate
	Uncertainty float64 // its reported uncertainty
	Pull        float64 // (Unfolded − Truth) / Uncertainty; NaN without an uncertainty
}

// Comparison sets an unfolded spectrum beside the known truth over the
// in-range truth bins (flow bins are unfolded too but are not part of the
// measurement).
type Comparison struct {
	Rows []Row
	// Chi2 is (μ − t)ᵀ V⁻¹ (μ − t) over the in-range bins, with V the
	// reported covariance restricted to them; NDF is the number of those
	// bins. Both are zero when no covariance was given.
	Chi2 float64
	NDF  int
	// PValue is the probability of a chi-square at least as large,
	// P(χ²_NDF ≥ Chi2), from gonum's distuv.ChiSquared.
	PValue float64
}

// Compare compares the unfolded estimate with the known truth t.
// uncertainty (per truth bin) and cov (truth bins × truth bins) may be
// nil; without cov no chi-square is computed. It returns an error if the
// lengths do not match the truth binning, or if the in-range block of cov
// is not positive definite.
func Compare(t *Truth, estimate, uncertainty []float64, cov mat.Symmetric) (*Comparison, error) {
	n := t.Scheme.Len()
	if len(estimate) != n || (uncertainty != nil && len(uncertainty) != n) {
		return nil, fmt.Errorf("demo: compare: %d estimates and %d uncertainties for %d truth bins", len(estimate), len(uncertainty), n)
	}
	if cov != nil && cov.SymmetricDim() != n {
		return nil, fmt.Errorf("demo: compare: covariance of size %d for %d truth bins", cov.SymmetricDim(), n)
	}
	nin := t.Scheme.InRange()
	c := &Comparison{Rows: make([]Row, nin)}
	for g := range nin {
		r := Row{Bin: g, Label: t.Scheme.Label(g), Truth: t.Expected[g], Unfolded: estimate[g], Pull: math.NaN()}
		if uncertainty != nil {
			r.Uncertainty = uncertainty[g]
			if r.Uncertainty > 0 {
				r.Pull = (r.Unfolded - r.Truth) / r.Uncertainty
			}
		}
		c.Rows[g] = r
	}
	if cov == nil {
		return c, nil
	}
	v := mat.NewSymDense(nin, nil)
	d := mat.NewVecDense(nin, nil)
	for i := range nin {
		d.SetVec(i, estimate[i]-t.Expected[i])
		for j := i; j < nin; j++ {
			v.SetSym(i, j, cov.At(i, j))
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(v) {
		return nil, errors.New("demo: compare: the covariance of the in-range bins is not positive definite")
	}
	x := mat.NewVecDense(nin, nil)
	if err := ch.SolveVecTo(x, d); err != nil {
		return nil, fmt.Errorf("demo: compare: %w", err)
	}
	c.Chi2 = mat.Dot(d, x)
	c.NDF = nin
	c.PValue = distuv.ChiSquared{K: float64(nin)}.Survival(c.Chi2)
	return c, nil
}
