package unfold

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// RowMatrix is a sparse matrix in compressed-row form: the entries of
// row t are Val[Ptr[t]:Ptr[t+1]] in the columns Col[Ptr[t]:Ptr[t+1]],
// columns increasing.
type RowMatrix struct {
	Rows, Cols int
	Ptr, Col   []int
	Val        []float64
}

// Dense returns d as a dense matrix.
func (d *RowMatrix) Dense() *mat.Dense {
	out := mat.NewDense(d.Rows, d.Cols, nil)
	for t := range d.Rows {
		for p := d.Ptr[t]; p < d.Ptr[t+1]; p++ {
			out.Set(t, d.Col[p], d.Val[p])
		}
	}
	return out
}

// Apply writes dst = D x and returns dst. It panics if the lengths
// differ from the matrix's; dst must not alias x.
func (d *RowMatrix) Apply(dst, x []float64) []float64 {
	if len(dst) != d.Rows || len(x) != d.Cols {
		panic(fmt.Sprintf("unfold: applying a %d×%d matrix to %d into %d entries", d.Rows, d.Cols, len(x), len(dst)))
	}
	for t := range d.Rows {
		var s float64
		for p := d.Ptr[t]; p < d.Ptr[t+1]; p++ {
			s += d.Val[p] * x[d.Col[p]]
		}
		dst[t] = s
	}
	return dst
}

// Derived is a quantity y = f(μ) derived from the estimate (package
// derive implements it) whose covariance D Cov Dᵀ, D = ∂y/∂μ at the
// estimate, is propagated source by source (method.md §22).
type Derived interface {
	// Len returns the number of bins of the quantity.
	Len() int
	// Jacobian returns D at mu (Len rows, one column per truth bin).
	Jacobian(mu []float64) *RowMatrix
}

// derivedMatrices is the number of dense Len×Len matrices held per
// derived quantity, the figure checked against the memory limit: the
// data's and the simulation's contributions, their total, and an
// ensemble's co-moments with its scratch.
const derivedMatrices = 4

// CheckDerived returns a *TooLargeError when the dense covariances of
// the derived quantities ds (four Len×Len matrices each) would not fit
// under limit bytes (0 for DefaultMemoryLimit), for a problem of nt
// truth and nr reco bins; nil otherwise. Unfold checks it before the
// unfolding whenever an uncertainty is computed.
func CheckDerived(ds []Derived, nt, nr int, limit int64) error {
	if limit == 0 {
		limit = DefaultMemoryLimit
	}
	var b int64
	for _, d := range ds {
		m := int64(d.Len())
		b += derivedMatrices * 8 * m * m
	}
	if b <= limit {
		return nil
	}
	largest := 0
	for i, d := range ds {
		if d.Len() > ds[largest].Len() {
			largest = i
		}
	}
	what := fmt.Sprintf("the dense covariances of %d derived quantities", len(ds))
	if len(ds) == 1 {
		what = "the dense covariances of the derived quantity"
	}
	return &TooLargeError{
		What: fmt.Sprintf("%s (the largest, number %d, has %d bins: %d matrices of %d × %d each)",
			what, largest+1, ds[largest].Len(), derivedMatrices, ds[largest].Len(), ds[largest].Len()),
		TruthBins: nt, RecoBins: nr, Columns: nr, Bytes: b, Limit: limit,
		Alternative: "derive fewer bins (keep fewer axes, or project a smaller region), or raise the memory limit",
	}
}

// derivedJacobians returns the Jacobians of ds at the estimate mu.
func derivedJacobians(ds []Derived, mu []float64) []*RowMatrix {
	if len(ds) == 0 {
		return nil
	}
	out := make([]*RowMatrix, len(ds))
	for i, d := range ds {
		out[i] = d.Jacobian(mu)
		if out[i].Rows != d.Len() || out[i].Cols != len(mu) {
			panic(fmt.Sprintf("unfold: derived quantity %d: Jacobian %d×%d for %d bins and %d truth bins", i, out[i].Rows, out[i].Cols, d.Len(), len(mu)))
		}
	}
	return out
}

// outer returns x xᵀ.
func outer(x []float64) *mat.SymDense {
	c := mat.NewSymDense(len(x), nil)
	c.SymOuterK(1, mat.NewVecDense(len(x), x))
	return c
}

// shiftDerived returns, for each Jacobian D, (D d)(D d)ᵀ: the exact
// derived covariance of a shift d (method.md §21).
func shiftDerived(ds []*RowMatrix, d []float64) []*mat.SymDense {
	if ds == nil {
		return nil
	}
	out := make([]*mat.SymDense, len(ds))
	for i, D := range ds {
		out[i] = outer(D.Apply(make([]float64, D.Rows), d))
	}
	return out
}

// jacobianDerived returns, for each Jacobian D, (D J) diag(v) (D J)ᵀ
// with J the dense Jacobian of the estimate and v the variances of its
// columns: the exact first-order derived covariance of the data source.
// D J (m rows, m ≤ the truth bins) is formed in jc.Work, the method's
// scratch buffer, which is free once the Jacobian is in jc.Data, scaled
// by √v, and multiplied with gonum's symmetric rank-k update.
func jacobianDerived(ds []*RowMatrix, jc *Jacobian, v []float64) []*mat.SymDense {
	if ds == nil {
		return nil
	}
	sd := make([]float64, len(v))
	for q, x := range v {
		sd[q] = math.Sqrt(max(x, 0))
	}
	out := make([]*mat.SymDense, len(ds))
	for i, D := range ds {
		n := D.Rows * jc.Cols
		dj := jc.Work
		if len(dj) < n {
			dj = make([]float64, n)
		}
		dj = dj[:n]
		clear(dj)
		for t := range D.Rows {
			row := dj[t*jc.Cols : (t+1)*jc.Cols]
			for p := D.Ptr[t]; p < D.Ptr[t+1]; p++ {
				w := D.Val[p]
				src := jc.Data[D.Col[p]*jc.Cols : (D.Col[p]+1)*jc.Cols]
				for q, x := range src {
					row[q] += w * x
				}
			}
			for q := range row {
				row[q] *= sd[q]
			}
		}
		c := mat.NewSymDense(D.Rows, nil)
		if D.Rows > 0 && jc.Cols > 0 {
			c.SymOuterK(1, mat.NewDense(D.Rows, jc.Cols, dj))
		}
		out[i] = c
	}
	return out
}

// DerivedEnsembles returns one full ensemble per Jacobian of ds (for
// example Result.DerivedJacobians), for the vectors D x of the samples
// x that AddDerived adds: their sample covariance is D Cov Dᵀ of the
// samples (method.md §22). It returns nil for no Jacobians.
func DerivedEnsembles(ds []*RowMatrix) []*Ensemble { return derivedEnsembles(ds) }

// AddDerived adds D x to ens[i] for each Jacobian D = ds[i]; ens comes
// from DerivedEnsembles(ds).
func AddDerived(ens []*Ensemble, ds []*RowMatrix, x []float64) { addDerived(ens, ds, x) }

// EnsembleCovariances returns the sample covariance of each ensemble,
// the Source.Derived of the samples (nil for none).
func EnsembleCovariances(ens []*Ensemble) []*mat.SymDense { return ensembleDerived(ens) }

func derivedEnsembles(ds []*RowMatrix) []*Ensemble {
	if ds == nil {
		return nil
	}
	out := make([]*Ensemble, len(ds))
	for i, D := range ds {
		out[i] = NewEnsemble(D.Rows, true)
	}
	return out
}

// addDerived adds D_i x to ens[i] for every Jacobian.
func addDerived(ens []*Ensemble, ds []*RowMatrix, x []float64) {
	for i, D := range ds {
		y := make([]float64, D.Rows)
		ens[i].Add(D.Apply(y, x))
	}
}

// ensembleDerived returns the sample covariances of the ensembles.
func ensembleDerived(ens []*Ensemble) []*mat.SymDense {
	if ens == nil {
		return nil
	}
	out := make([]*mat.SymDense, len(ens))
	for i, e := range ens {
		out[i] = e.Covariance(nil)
	}
	return out
}

// DerivedCovariance returns the covariance of derived quantity i of the
// problem (Problem.Derived), the sum of the sources' contributions
// (Source.Derived), or nil when a source has none (a total that omits a
// source would mislead) or there is no uncertainty computation. The
// result is a new matrix.
func (r *Result) DerivedCovariance(i int) *mat.SymDense {
	if len(r.Sources) == 0 {
		return nil
	}
	var c *mat.SymDense
	for _, s := range r.Sources {
		if i >= len(s.Derived) || s.Derived[i] == nil {
			return nil
		}
		if c == nil {
			c = mat.NewSymDense(s.Derived[i].SymmetricDim(), nil)
		}
		c.AddSym(c, s.Derived[i])
	}
	return c
}
