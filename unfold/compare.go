package unfold

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// EigenvalueCut is the relative eigenvalue cut of the pseudo-inverse
// behind every chi-square with a covariance (PseudoChi2, Compare): an
// eigen-direction of the covariance whose eigenvalue is at most
// EigenvalueCut times the largest is left out, and the number of
// degrees of freedom is the number of directions kept (method.md §19).
const EigenvalueCut = 1e-8

// Eigen holds the eigen-decomposition of a covariance restricted to some
// bins, from gonum's mat.EigenSym, with what the pseudo-inverse keeps.
type Eigen struct {
	// Values are the eigenvalues in ascending order; Vectors the
	// eigenvectors as columns.
	Values  []float64
	Vectors *mat.Dense
	// Kept is the number of eigenvalues above the cut (the largest
	// ones); Condition the ratio of the largest eigenvalue to the
	// smallest, +Inf when the smallest is not positive.
	Kept      int
	Condition float64
}

// Decompose returns the eigen-decomposition of the block of cov on the
// given bins with the relative cut (0 means EigenvalueCut). It returns
// an error when the decomposition fails, when the block holds a NaN or
// infinity, or when an eigenvalue is negative beyond the cut (the
// matrix is not a covariance). An empty block or one that is all zero
// gives Kept 0.
func Decompose(cov mat.Symmetric, bins []int, cut float64) (*Eigen, error) {
	if cut == 0 {
		cut = EigenvalueCut
	}
	n := len(bins)
	e := &Eigen{Condition: math.Inf(1)}
	if n == 0 {
		return e, nil
	}
	v := mat.NewSymDense(n, nil)
	for a, i := range bins {
		for b := a; b < n; b++ {
			x := cov.At(i, bins[b])
			if math.IsNaN(x) || math.IsInf(x, 0) {
				return nil, &NumericalError{Iteration: -1, Reason: fmt.Sprintf("the covariance of truth bins %d and %d is %v", i, bins[b], x)}
			}
			v.SetSym(a, b, x)
		}
	}
	var es mat.EigenSym
	if !es.Factorize(v, true) {
		return nil, &NumericalError{Iteration: -1, Reason: "the eigen-decomposition of the covariance did not converge"}
	}
	e.Values = es.Values(nil)
	e.Vectors = new(mat.Dense)
	es.VectorsTo(e.Vectors)
	top := e.Values[n-1]
	if top <= 0 {
		return e, nil
	}
	if low := e.Values[0]; low < -cut*top {
		return nil, &NumericalError{Iteration: -1, Reason: fmt.Sprintf("the covariance is not positive semi-definite: eigenvalue %.3g against the largest %.3g", low, top)}
	}
	for _, x := range e.Values {
		if x > cut*top {
			e.Kept++
		}
	}
	if e.Values[0] > 0 {
		e.Condition = top / e.Values[0]
	}
	return e, nil
}

// Chi2 returns dᵀ V⁺ d = Σ_k (u_kᵀ d)² / λ_k over the kept directions
// (the pseudo-inverse V⁺ of method.md §19) and the effective number of
// degrees of freedom, the number of directions kept. d has one entry per
// bin of the decomposition; a shorter d panics.
func (e *Eigen) Chi2(d []float64) (chi2 float64, ndf int) {
	n := len(e.Values)
	if len(d) != n {
		panic(fmt.Sprintf("unfold: Chi2 of %d differences for %d bins", len(d), n))
	}
	for k := n - e.Kept; k < n; k++ {
		var p float64
		for a := range n {
			p += e.Vectors.At(a, k) * d[a]
		}
		chi2 += p * p / e.Values[k]
	}
	return chi2, e.Kept
}

// CompareRow is one compared truth bin of a Comparison.
type CompareRow struct {
	Bin         int     // global truth bin
	Reference   float64 // the reference value
	Estimate    float64 // the unfolded estimate
	Uncertainty float64 // its total uncertainty (0 without one)
	// Pull is (Estimate − Reference) / Uncertainty; NaN where the
	// uncertainty is 0 or the bin is not determined.
	Pull       float64
	Determined bool
}

// Comparison sets an unfolded spectrum beside a reference spectrum (a
// known truth, another measurement) over chosen truth bins.
type Comparison struct {
	Rows []CompareRow
	// Chi2 is (μ − r)ᵀ V⁺ (μ − r) over the determined compared bins with
	// V the covariance given (or the diagonal of the squared
	// uncertainties without one; Diagonal is then true), through the
	// pseudo-inverse with the relative eigenvalue cut Cut (method.md
	// §19); NDF is the number of eigen-directions kept, out of Bins
	// determined compared bins. Condition is the condition number of V
	// on those bins (+Inf when singular). All zero without an
	// uncertainty.
	Chi2      float64
	NDF       int
	Bins      int
	Cut       float64
	Condition float64
	Diagonal  bool
	// PValue is P(χ²_NDF ≥ Chi2) (gonum's distuv.ChiSquared); 1 for
	// NDF 0.
	PValue float64
}

// Compare compares the estimate with the reference spectrum ref on the
// truth bins bins (nil: every bin), all slices having one entry per
// truth bin. uncertainty and cov may be nil: without cov the chi-square
// uses the diagonal of the squared uncertainties, without either there
// is none. determined, when not nil, leaves the bins it marks false out
// of the pulls and the chi-square. cut is the relative eigenvalue cut
// (0 means EigenvalueCut). It returns an error for lengths that do not
// match, a reference that is not a finite number, or a covariance that
// is not one (Decompose).
func Compare(ref, estimate, uncertainty []float64, cov mat.Symmetric, determined []bool, bins []int, cut float64) (*Comparison, error) {
	n := len(estimate)
	if len(ref) != n || (uncertainty != nil && len(uncertainty) != n) || (determined != nil && len(determined) != n) {
		return nil, fmt.Errorf("unfold: compare: %d reference values, %d estimates, %d uncertainties and %d determined flags: want one per truth bin", len(ref), n, len(uncertainty), len(determined))
	}
	if cov != nil && cov.SymmetricDim() != n {
		return nil, fmt.Errorf("unfold: compare: covariance of size %d for %d truth bins", cov.SymmetricDim(), n)
	}
	if cut == 0 {
		cut = EigenvalueCut
	}
	if bins == nil {
		bins = make([]int, n)
		for j := range bins {
			bins[j] = j
		}
	}
	c := &Comparison{Rows: make([]CompareRow, len(bins)), Cut: cut, PValue: 1}
	var used []int
	var d []float64
	for k, j := range bins {
		if j < 0 || j >= n {
			return nil, fmt.Errorf("unfold: compare: truth bin %d of %d", j, n)
		}
		if math.IsNaN(ref[j]) || math.IsInf(ref[j], 0) {
			return nil, fmt.Errorf("unfold: compare: the reference of truth bin %d is %v", j, ref[j])
		}
		r := CompareRow{Bin: j, Reference: ref[j], Estimate: estimate[j], Pull: math.NaN(), Determined: determined == nil || determined[j]}
		if uncertainty != nil {
			r.Uncertainty = uncertainty[j]
		}
		if r.Determined && r.Uncertainty > 0 {
			r.Pull = (r.Estimate - r.Reference) / r.Uncertainty
		}
		if r.Determined {
			used = append(used, j)
			d = append(d, r.Estimate-r.Reference)
		}
		c.Rows[k] = r
	}
	if uncertainty == nil {
		return c, nil
	}
	v := cov
	if v == nil {
		c.Diagonal = true
		dg := mat.NewSymDense(n, nil)
		for _, j := range used {
			dg.SetSym(j, j, uncertainty[j]*uncertainty[j])
		}
		v = dg
	}
	e, err := Decompose(v, used, cut)
	if err != nil {
		return nil, err
	}
	c.Bins, c.Condition = len(used), e.Condition
	c.Chi2, c.NDF = e.Chi2(d)
	if c.NDF > 0 {
		c.PValue = distuv.ChiSquared{K: float64(c.NDF)}.Survival(c.Chi2)
	}
	return c, nil
}
