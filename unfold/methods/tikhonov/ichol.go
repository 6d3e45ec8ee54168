package tikhonov

import (
	"math"
	"slices"
)

// normalMatrix holds Rᵀ W R and Lᵀ L explicitly, over the determined
// truth bins, as the lower triangles of one sparse pattern: row j lists
// its columns c ≤ j in increasing order, the diagonal last. An
// undetermined bin has its diagonal only (m = 1, l = 0), which keeps it
// out of every other row. It is the matrix the incomplete Cholesky
// preconditioner factorises (method.md §13); the products of the
// conjugate gradients still run on R and L themselves.
//
// Memory: 32 bytes per entry of the lower triangle (the column, both
// parts and the factor), about the number of truth bins times half the
// number of truth bins that share a reco bin or a penalty row with a bin.
type normalMatrix struct {
	rowPtr []int
	col    []int
	m, l   []float64
}

// newNormalMatrix forms the lower triangles of Rᵀ W R and Lᵀ L of sy by
// rows (Gustavson's row-by-row product), summing in the order of the reco
// bins and of the penalty rows: the bits depend on nothing but the
// problem.
func newNormalMatrix(sy *system) *normalMatrix {
	nt, nr := sy.nt, sy.p.RecoBins()
	det := sy.p.Determined()
	a := sy.p.Migrations()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	ig := sy.p.InvGenerated()
	// The response by reco rows: for reco bin i its truth bins and R_ij.
	rp := make([]int, nr+1)
	for _, i := range rowIdx {
		rp[i+1]++
	}
	for i := range nr {
		rp[i+1] += rp[i]
	}
	rc := make([]int, len(rowIdx))
	rv := make([]float64, len(rowIdx))
	next := slices.Clone(rp[:nr])
	for j := range nt {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			i := rowIdx[k]
			rc[next[i]], rv[next[i]] = j, val[k]*ig[j]
			next[i]++
		}
	}
	// The penalty by truth bins: for bin j the positions of its entries.
	l := sy.l
	lp := make([]int, nt+1)
	for _, j := range l.idx {
		lp[j+1]++
	}
	for j := range nt {
		lp[j+1] += lp[j]
	}
	lpos := make([]int, len(l.idx))
	lnext := slices.Clone(lp[:nt])
	for p, j := range l.idx {
		lpos[lnext[j]] = p
		lnext[j]++
	}

	nm := &normalMatrix{rowPtr: make([]int, nt+1)}
	accM, accL := make([]float64, nt), make([]float64, nt)
	mark := make([]int, nt)
	for j := range mark {
		mark[j] = -1
	}
	var touched []int
	w := l.width
	for j := range nt {
		touched = touched[:0]
		if det[j] {
			for k := colPtr[j]; k < colPtr[j+1]; k++ {
				i := rowIdx[k]
				f := val[k] * ig[j] * sy.w[i]
				for q := rp[i]; q < rp[i+1]; q++ {
					c := rc[q]
					if c > j || !det[c] {
						continue
					}
					if mark[c] != j {
						mark[c] = j
						accM[c], accL[c] = 0, 0
						touched = append(touched, c)
					}
					accM[c] += f * rv[q]
				}
			}
			for _, p := range lpos[lp[j]:lp[j+1]] {
				r := p / w
				cj := l.coef[p]
				for q := r * w; q < (r+1)*w; q++ {
					c := l.idx[q]
					if c > j || !det[c] {
						continue
					}
					if mark[c] != j {
						mark[c] = j
						accM[c], accL[c] = 0, 0
						touched = append(touched, c)
					}
					accL[c] += cj * l.coef[q]
				}
			}
		}
		if mark[j] != j { // the diagonal, also of an undetermined bin
			mark[j] = j
			accM[j], accL[j] = 0, 0
			touched = append(touched, j)
		}
		if !det[j] {
			accM[j] = 1
		}
		slices.Sort(touched)
		for _, c := range touched {
			nm.col = append(nm.col, c)
			nm.m = append(nm.m, accM[c])
			nm.l = append(nm.l, accL[c])
		}
		nm.rowPtr[j+1] = len(nm.col)
	}
	return nm
}

// ichol is an incomplete Cholesky factor L̃ of Rᵀ W R + τ² Lᵀ L on the
// pattern of its lower triangle (IC(0): no fill), so that L̃ L̃ᵀ
// approximates the normal matrix; applying the preconditioner is one
// forward and one backward substitution.
type ichol struct {
	nm    *normalMatrix
	f     []float64 // the factor, on nm's pattern
	shift float64   // the relative diagonal shift that made it succeed
}

// icholShifts are the relative shifts of the diagonal tried in turn when
// a pivot is not positive (the factorisation exists for an M-matrix, and
// the normal matrix of a curvature penalty is none): T. A. Manteuffel,
// Math. Comp. 34 (1980) 473, common practice.
var icholShifts = []float64{0, 1e-4, 1e-3, 1e-2, 1e-1, 1}

// newIchol factorises the normal matrix at tau; it returns nil if no
// shift gives positive pivots (then the diagonal preconditioner is used).
func newIchol(nm *normalMatrix, tau float64) *ichol {
	t2 := tau * tau
	ic := &ichol{nm: nm, f: make([]float64, len(nm.col))}
	for _, s := range icholShifts {
		for p := range ic.f {
			ic.f[p] = nm.m[p] + t2*nm.l[p]
		}
		if s > 0 {
			for i := range len(nm.rowPtr) - 1 {
				ic.f[nm.rowPtr[i+1]-1] *= 1 + s
			}
		}
		if ic.factor() {
			ic.shift = s
			return ic
		}
	}
	return nil
}

// factor overwrites f (the lower triangle of the matrix) by its IC(0)
// factor, row by row; it reports false at a pivot that is not positive.
func (ic *ichol) factor() bool {
	rp, col, f := ic.nm.rowPtr, ic.nm.col, ic.f
	for i := range len(rp) - 1 {
		for p := rp[i]; p < rp[i+1]; p++ {
			k := col[p]
			s := f[p]
			// s −= Σ_{c<k} L̃_ic L̃_kc over the columns rows i and k share.
			a, b, bEnd := rp[i], rp[k], rp[k+1]-1
			for a < p && b < bEnd {
				switch ca, cb := col[a], col[b]; {
				case ca == cb:
					s -= f[a] * f[b]
					a++
					b++
				case ca < cb:
					a++
				default:
					b++
				}
			}
			if k < i {
				f[p] = s / f[bEnd]
				continue
			}
			if !(s > 0) {
				return false
			}
			f[p] = math.Sqrt(s)
		}
	}
	return true
}

// apply sets z = (L̃ L̃ᵀ)⁻¹ r. z must not alias r.
func (ic *ichol) apply(z, r []float64) {
	rp, col, f := ic.nm.rowPtr, ic.nm.col, ic.f
	n := len(rp) - 1
	for i := range n {
		s := r[i]
		d := rp[i+1] - 1
		for p := rp[i]; p < d; p++ {
			s -= f[p] * z[col[p]]
		}
		z[i] = s / f[d]
	}
	for i := n - 1; i >= 0; i-- {
		d := rp[i+1] - 1
		z[i] /= f[d]
		zi := z[i]
		for p := rp[i]; p < d; p++ {
			z[col[p]] -= f[p] * zi
		}
	}
}
