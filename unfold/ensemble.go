package unfold

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Ensemble accumulates the mean and the variances, or the full
// covariance, of an ensemble of vectors of one length (toy estimates,
// unfoldings of sampled responses, bootstrap replicas), one vector at a
// time or by merging ensembles accumulated separately.
//
// Adding uses Welford's update (B. P. Welford, Technometrics 4 (1962)
// 419; method.md §17): with d = x − mean before and e = x − mean after
// the update, the co-moment of entries j ≤ k grows by d_j e_k. Merging
// uses the pairwise formula of T. F. Chan, G. H. Golub and R. J. LeVeque
// (Stanford report STAN-CS-79-773, 1979): the co-moments add, plus
// δ_j δ_k n_a n_b / n with δ the difference of the means. Both are
// stable, and an ensemble split into any parts and merged gives the
// mean and covariance of the whole to rounding (not bit for bit: adding
// in one order is the reference).
//
// The fields are exported so that a partial ensemble can be written and
// read back (JSON) by separate processes.
type Ensemble struct {
	// N is the number of vectors added.
	N int64 `json:"n"`
	// Mean is the running mean.
	Mean []float64 `json:"mean"`
	// M2 holds the sums of squared deviations per entry (diagonal
	// ensembles), or the co-moments of the upper triangle, row by row
	// (entries (j,k) with j ≤ k, full ensembles).
	M2 []float64 `json:"m2"`
	// Full reports that M2 holds the full upper triangle.
	Full bool `json:"full"`

	d []float64 // scratch: deviations before the update
}

// NewEnsemble returns an empty ensemble of vectors of length n, with the
// full covariance when full is true (n(n+1)/2 co-moments) or the
// variances only.
func NewEnsemble(n int, full bool) *Ensemble {
	m := n
	if full {
		m = n * (n + 1) / 2
	}
	return &Ensemble{Mean: make([]float64, n), M2: make([]float64, m), Full: full}
}

// Len returns the length of the vectors.
func (e *Ensemble) Len() int { return len(e.Mean) }

// Add adds the vector x. It panics if len(x) differs from Len.
func (e *Ensemble) Add(x []float64) {
	n := len(e.Mean)
	if len(x) != n {
		panic(fmt.Sprintf("unfold: adding a vector of length %d to an ensemble of length %d", len(x), n))
	}
	e.N++
	cnt := float64(e.N)
	if !e.Full {
		for j, v := range x {
			d := v - e.Mean[j]
			e.Mean[j] += d / cnt
			e.M2[j] += d * (v - e.Mean[j])
		}
		return
	}
	if len(e.d) != n {
		e.d = make([]float64, n)
	}
	for j, v := range x {
		d := v - e.Mean[j]
		e.d[j] = d
		e.Mean[j] += d / cnt
	}
	p := 0
	for j := range n {
		dj := e.d[j]
		for k := j; k < n; k++ {
			e.M2[p] += dj * (x[k] - e.Mean[k])
			p++
		}
	}
}

// Merge adds the vectors of o to e (o is unchanged). It panics if the
// lengths or the kinds (full or diagonal) differ.
func (e *Ensemble) Merge(o *Ensemble) {
	if len(o.Mean) != len(e.Mean) || o.Full != e.Full {
		panic("unfold: merging ensembles of different lengths or kinds")
	}
	if o.N == 0 {
		return
	}
	if e.N == 0 {
		e.N = o.N
		copy(e.Mean, o.Mean)
		copy(e.M2, o.M2)
		return
	}
	na, nb := float64(e.N), float64(o.N)
	n := na + nb
	f := na * nb / n
	if !e.Full {
		for j := range e.Mean {
			d := o.Mean[j] - e.Mean[j]
			e.M2[j] += o.M2[j] + d*d*f
			e.Mean[j] += d * nb / n
		}
		e.N += o.N
		return
	}
	nt := len(e.Mean)
	if len(e.d) != nt {
		e.d = make([]float64, nt)
	}
	for j := range e.Mean {
		e.d[j] = o.Mean[j] - e.Mean[j]
	}
	p := 0
	for j := range nt {
		dj := e.d[j] * f
		for k := j; k < nt; k++ {
			e.M2[p] += o.M2[p] + dj*e.d[k]
			p++
		}
	}
	for j := range e.Mean {
		e.Mean[j] += e.d[j] * nb / n
	}
	e.N += o.N
}

// Variances sets dst[j] to the sample variance of entry j (divided by
// N − 1; 0 with fewer than two vectors) and returns dst, allocated when
// nil. It panics if dst has another length.
func (e *Ensemble) Variances(dst []float64) []float64 {
	n := len(e.Mean)
	if dst == nil {
		dst = make([]float64, n)
	}
	if len(dst) != n {
		panic("unfold: variance destination of the wrong length")
	}
	if e.N < 2 {
		clear(dst)
		return dst
	}
	den := float64(e.N - 1)
	if !e.Full {
		for j, m := range e.M2 {
			dst[j] = m / den
		}
		return dst
	}
	p := 0
	for j := range n {
		dst[j] = e.M2[p] / den
		p += n - j
	}
	return dst
}

// Covariance returns the sample covariance (divided by N − 1; zero with
// fewer than two vectors) in dst, allocated when nil. It panics if the
// ensemble is diagonal or dst has another size.
func (e *Ensemble) Covariance(dst *mat.SymDense) *mat.SymDense {
	if !e.Full {
		panic("unfold: covariance of a diagonal ensemble")
	}
	n := len(e.Mean)
	if dst == nil {
		dst = mat.NewSymDense(n, nil)
	}
	if dst.SymmetricDim() != n {
		panic("unfold: covariance destination of the wrong size")
	}
	p := 0
	for j := range n {
		for k := j; k < n; k++ {
			v := 0.0
			if e.N >= 2 {
				v = e.M2[p] / float64(e.N-1)
			}
			dst.SetSym(j, k, v)
			p++
		}
	}
	return dst
}
