package demo

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
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
	// Chi2 is (μ − t)ᵀ V⁺ (μ − t) over the in-range bins, with V the
	// reported covariance restricted to them and V⁺ its pseudo-inverse
	// (unfold.Compare, method.md §19); NDF is the number of
	// eigen-directions kept (the number of bins for a well-conditioned
	// V), Condition the condition number of V. All zero when no
	// covariance was given.
	Chi2      float64
	NDF       int
	Condition float64
	// PValue is the probability of a chi-square at least as large,
	// P(χ²_NDF ≥ Chi2), from gonum's distuv.ChiSquared.
	PValue float64
}

// Compare compares the unfolded estimate with the known truth t.
// uncertainty (per truth bin) and cov (truth bins × truth bins) may be
// nil; without cov no chi-square is computed. It returns an error if the
// lengths do not match the truth binning, or if the in-range block of cov
// is not a covariance (a negative eigenvalue beyond the cut). The pulls
// and the chi-square are those of unfold.Compare.
func Compare(t *Truth, estimate, uncertainty []float64, cov mat.Symmetric) (*Comparison, error) {
	n := t.Scheme.Len()
	if len(estimate) != n || (uncertainty != nil && len(uncertainty) != n) {
		return nil, fmt.Errorf("demo: compare: %d estimates and %d uncertainties for %d truth bins", len(estimate), len(uncertainty), n)
	}
	if cov != nil && cov.SymmetricDim() != n {
		return nil, fmt.Errorf("demo: compare: covariance of size %d for %d truth bins", cov.SymmetricDim(), n)
	}
	bins := make([]int, t.Scheme.InRange())
	for g := range bins {
		bins[g] = g
	}
	uc, err := unfold.Compare(t.Expected, estimate, uncertainty, cov, nil, bins, 0)
	if err != nil {
		return nil, fmt.Errorf("demo: compare: %w", err)
	}
	c := &Comparison{Rows: make([]Row, len(bins))}
	if cov != nil { // without one, the demo states no chi-square
		c.Chi2, c.NDF, c.Condition, c.PValue = uc.Chi2, uc.NDF, uc.Condition, uc.PValue
	}
	for g, r := range uc.Rows {
		c.Rows[g] = Row{Bin: g, Label: t.Scheme.Label(g), Truth: r.Reference, Unfolded: r.Estimate, Uncertainty: r.Uncertainty, Pull: r.Pull}
	}
	return c, nil
}
