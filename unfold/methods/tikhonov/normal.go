package tikhonov

import (
	"context"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/unfold"
)

// system is the problem in the form of the normal equations
// (method.md §13 Tikhonov regularisation):
//
//	(Rᵀ W R + τ² Lᵀ L) x = Rᵀ W y + τ² Lᵀ L x0,  y = n − b,  W = V⁻¹,
//
// over the determined truth bins (the others have zero rows and columns
// and stay 0).
type system struct {
	p    *unfold.Prepared
	nt   int
	w    []float64 // 1/V_ii
	l    *penalty
	x0   []float64 // nil for x0 = 0
	fd   []float64 // diag(Rᵀ W R)
	ld   []float64 // diag(Lᵀ L)
	tol  float64
	maxK int
}

func newSystem(p *unfold.Prepared, l *penalty, x0 []float64, tol float64, maxK int) *system {
	nt := p.TruthBins()
	sy := &system{p: p, nt: nt, w: p.Weights(), l: l, x0: x0, tol: tol, maxK: maxK}
	if sy.maxK == 0 {
		sy.maxK = max(1000, 10*nt)
	}
	a := p.Migrations()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	ig := p.InvGenerated()
	sy.fd = make([]float64, nt)
	for j := 0; j < nt; j++ {
		var s float64
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			r := val[k] * ig[j]
			s += r * r * sy.w[rowIdx[k]]
		}
		sy.fd[j] = s
	}
	sy.ld = make([]float64, nt)
	l.addDiagonal(sy.ld, 1)
	return sy
}

// scale returns s with s² = trace(Rᵀ W R)/trace(Lᵀ L), the tau at which
// the two terms of the normal equations have equal traces (1 without
// penalty rows).
func (sy *system) scale() float64 {
	var f, l float64
	for j := range sy.fd {
		f += sy.fd[j]
		l += sy.ld[j]
	}
	if !(l > 0) || !(f > 0) {
		return 1
	}
	return math.Sqrt(f / l)
}

// cg is the scratch of the conjugate gradients for one system; it is
// used by one goroutine.
type cg struct {
	sy                *system
	r, z, d, q, tmp   []float64 // truth-sized
	inv               []float64 // the inverse diagonal (Jacobi), 0 outside the fit
	pc                *ichol    // the incomplete Cholesky preconditioner at the solve's tau; nil: Jacobi
	fold, wf          []float64 // reco-sized
	lx                []float64 // one per penalty row
	rhsBuf            []float64
	tol               float64 // the stopping tolerance (the system's, or the scan's)
	lastIter          int
	lastRes, lastNorm float64
}

func newCG(sy *system) *cg {
	nt, nr := sy.nt, sy.p.RecoBins()
	return &cg{sy: sy, tol: sy.tol, r: make([]float64, nt), inv: make([]float64, nt), z: make([]float64, nt), d: make([]float64, nt), q: make([]float64, nt), tmp: make([]float64, nt),
		fold: make([]float64, nr), wf: make([]float64, nr), lx: make([]float64, sy.l.rows()), rhsBuf: make([]float64, nt)}
}

// mul sets dst = (Rᵀ W R + τ² Lᵀ L) x.
func (c *cg) mul(dst, x []float64, tau float64) {
	sy := c.sy
	sy.p.Fold(c.fold, x, c.tmp)
	for i, v := range c.fold {
		c.wf[i] = sy.w[i] * v
	}
	sy.p.BackProject(dst, c.wf)
	if tau > 0 {
		sy.l.addNormal(dst, x, c.lx, tau*tau)
	}
}

func dot(a, b []float64) float64 {
	var s float64
	for i, x := range a {
		s += x * b[i]
	}
	return s
}

// precondition sets z to the incomplete Cholesky preconditioner applied
// to r, when there is one (z holds the Jacobi one otherwise).
func (c *cg) precondition() {
	if c.pc == nil {
		return
	}
	c.pc.apply(c.z, c.r)
	for j, v := range c.inv {
		if v == 0 {
			c.z[j] = 0
		}
	}
}

// solve solves the normal equations for right-hand side b into x by
// conjugate gradients preconditioned with c.pc (incomplete Cholesky) or,
// without it, with the diagonal (Jacobi),
// starting from the value x holds (a warm start; zero it for none).
// It stops when |r| ≤ tol |b| and reports whether it did within the
// iteration bound. All sums run serially in bin order: the bits do not
// depend on the number of cores.
func (c *cg) solve(ctx context.Context, x, b []float64, tau float64) (bool, error) {
	sy := c.sy
	det := sy.p.Determined()
	t2 := tau * tau
	inv := c.inv
	for j := range inv {
		if d := sy.fd[j] + t2*sy.ld[j]; det[j] && d > 0 {
			inv[j] = 1 / d
		} else {
			inv[j] = 0
			x[j] = 0
		}
	}
	bn := math.Sqrt(dot(b, b))
	c.lastIter, c.lastRes, c.lastNorm = 0, 0, bn
	if bn == 0 {
		clear(x)
		return true, nil
	}
	c.mul(c.r, x, tau)
	for j := range c.r {
		c.r[j] = b[j] - c.r[j]
		if inv[j] == 0 {
			c.r[j] = 0
		}
		c.z[j] = inv[j] * c.r[j]
	}
	c.precondition()
	copy(c.d, c.z)
	rz := dot(c.r, c.z)
	for k := 1; k <= sy.maxK; k++ {
		if k%32 == 0 {
			if err := ctx.Err(); err != nil {
				return false, err
			}
		}
		rn := math.Sqrt(dot(c.r, c.r))
		c.lastIter, c.lastRes = k-1, rn/bn
		if rn <= c.tol*bn {
			return true, nil
		}
		c.mul(c.q, c.d, tau)
		for j := range c.q {
			if inv[j] == 0 {
				c.q[j] = 0
			}
		}
		dq := dot(c.d, c.q)
		if !(dq > 0) {
			return false, nil // the system is singular along d
		}
		alpha := rz / dq
		for j := range x {
			x[j] += alpha * c.d[j]
			c.r[j] -= alpha * c.q[j]
			c.z[j] = inv[j] * c.r[j]
		}
		c.precondition()
		rz1 := dot(c.r, c.z)
		beta := rz1 / rz
		rz = rz1
		for j := range c.d {
			c.d[j] = c.z[j] + beta*c.d[j]
		}
	}
	rn := math.Sqrt(dot(c.r, c.r))
	c.lastIter, c.lastRes = sy.maxK, rn/bn
	return rn <= c.tol*bn, nil
}

// dense is the normal matrix over the determined bins, factorised for
// one tau (gonum Cholesky).
type dense struct {
	sy   *system
	idx  []int // determined truth bins, in order
	f    *mat.SymDense
	chol mat.Cholesky
	tau  float64
}

// newDense forms Rᵀ W R densely over the determined bins.
func newDense(sy *system) *dense {
	det := sy.p.Determined()
	d := &dense{sy: sy}
	for j, ok := range det {
		if ok {
			d.idx = append(d.idx, j)
		}
	}
	m := len(d.idx)
	nr := sy.p.RecoBins()
	rd := mat.NewDense(nr, m, nil)
	a := sy.p.Migrations()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	ig := sy.p.InvGenerated()
	for c, j := range d.idx {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			i := rowIdx[k]
			rd.Set(i, c, val[k]*ig[j]*math.Sqrt(sy.w[i]))
		}
	}
	d.f = mat.NewSymDense(m, nil)
	d.f.SymOuterK(1, rd.T())
	return d
}

// normal returns Rᵀ W R + τ² Lᵀ L over the determined bins.
func (d *dense) normal(tau float64) *mat.SymDense {
	out := mat.NewSymDense(len(d.idx), nil)
	out.CopySym(d.f)
	if tau > 0 {
		d.addPenalty(out, tau*tau)
	}
	return out
}

// addPenalty adds t Lᵀ L over the determined bins to dst.
func (d *dense) addPenalty(dst *mat.SymDense, t float64) {
	pos := make(map[int]int, len(d.idx))
	for c, j := range d.idx {
		pos[j] = c
	}
	l := d.sy.l
	w := l.width
	for r := 0; r < l.rows(); r++ {
		for a := r * w; a < (r+1)*w; a++ {
			for b := r * w; b < (r+1)*w; b++ {
				pa, pb := pos[l.idx[a]], pos[l.idx[b]]
				if pa <= pb {
					dst.SetSym(pa, pb, dst.At(pa, pb)+t*l.coef[a]*l.coef[b])
				}
			}
		}
	}
}

// factor factorises the normal matrix for tau.
func (d *dense) factor(tau float64) error {
	d.tau = tau
	if !d.chol.Factorize(d.normal(tau)) {
		return &unfold.NumericalError{Reason: fmt.Sprintf("the normal equations are singular at tau = %g (the response and the penalty leave a direction of the truth undetermined); raise tau", tau)}
	}
	return nil
}

// solve sets x (truth-sized) to the solution for right-hand side b.
func (d *dense) solve(x, b []float64) error {
	m := len(d.idx)
	bv := mat.NewVecDense(m, nil)
	for c, j := range d.idx {
		bv.SetVec(c, b[j])
	}
	var xv mat.VecDense
	if err := d.chol.SolveVecTo(&xv, bv); err != nil {
		return &unfold.NumericalError{Reason: fmt.Sprintf("the normal equations at tau = %g: %v", d.tau, err)}
	}
	clear(x)
	for c, j := range d.idx {
		x[j] = xv.AtVec(c)
	}
	return nil
}
