package tikhonov

import (
	"context"
	"math"
	"slices"
	"sync"

	"github.com/desmear/desmear/unfold"
)

var sqrt = math.Sqrt

// StillFraction is the least speed of the L-curve, as a fraction of its
// extent per decade of tau, at which its curvature is used.
const StillFraction = 0.01

// engine solves the normal equations of a system, densely or by
// conjugate gradients.
type engine struct {
	sy      *system
	dn      *dense // nil: conjugate gradients
	nominal *cg    // the first solver handed out, whose solve is the nominal one
	// warm is the scan's solution at the chosen tau, the start of the
	// nominal solve (conjugate gradients without a bias only; nil if
	// the scan's solutions were too large to keep).
	warm []float64

	// The conjugate gradients' preconditioner: the explicit normal
	// matrix (formed once) and its incomplete factor at the last tau.
	nmOnce sync.Once
	nm     *normalMatrix
	mu     sync.Mutex
	icTau  float64
	icSet  bool
	ic     *ichol
}

// jacobiOnly switches the incomplete Cholesky preconditioner off (the
// benchmarks compare the two).
var jacobiOnly = false

// preconditioner returns the incomplete Cholesky factor at tau (nil if
// none exists), factorising when tau differs from the last one. Solvers
// at one tau share it (it is read only).
func (e *engine) preconditioner(tau float64) *ichol {
	e.nmOnce.Do(func() { e.nm = newNormalMatrix(e.sy) })
	e.mu.Lock()
	defer e.mu.Unlock()
	if !e.icSet || e.icTau != tau {
		e.ic, e.icTau, e.icSet = nil, tau, true
		if !jacobiOnly {
			e.ic = newIchol(e.nm, tau)
		}
	}
	return e.ic
}

func newEngine(sy *system, useDense bool) *engine {
	e := &engine{sy: sy}
	if useDense {
		e.dn = newDense(sy)
	}
	return e
}

func (e *engine) kind() string {
	if e.dn != nil {
		return "dense"
	}
	return "cg"
}

// prepare readies the engine for solves at tau (the dense factorisation).
func (e *engine) prepare(tau float64) error {
	if e.dn != nil {
		return e.dn.factor(tau)
	}
	return nil
}

// solve solves the normal equations at tau for the right-hand side b
// into x, with c as the scratch of the conjugate gradients (after
// prepare(tau) for the dense engine). x holds the warm start of the
// conjugate gradients.
func (e *engine) solve(ctx context.Context, c *cg, x, b []float64, tau float64, strict bool) (bool, error) {
	if e.dn != nil {
		return true, e.dn.solve(x, b)
	}
	c.pc = e.preconditioner(tau)
	ok, err := c.solve(ctx, x, b, tau)
	if err == nil && !ok && strict {
		err = errNotConverged(c, tau)
	}
	return ok, err
}

// solver is K y = (Rᵀ W R + τ² Lᵀ L)⁻¹ Rᵀ W y, an unfold.Solver.
type solver struct {
	e    *engine
	c    *cg
	tau  float64
	b    []float64
	warm []float64 // the start of the first solve (nil: zero)
}

func (e *engine) solver(tau float64) unfold.Solver {
	s := &solver{e: e, c: newCG(e.sy), tau: tau, b: make([]float64, e.sy.nt)}
	if e.nominal == nil {
		e.nominal = s.c
		s.warm = e.warm
	}
	return s
}

// Solve sets dst = K y. The first solve of the nominal solver starts
// from the scan's solution at its tau (the conjugate gradients stop at
// the same tolerance from any start); every other solve from zero.
func (s *solver) Solve(ctx context.Context, dst, y []float64) error {
	s.c.rhs(s.b, y, 0)
	clear(dst)
	if s.warm != nil {
		copy(dst, s.warm)
		s.warm = nil
	}
	_, err := s.e.solve(ctx, s.c, dst, s.b, s.tau, true)
	return err
}

// rhs sets dst = Rᵀ W y + t Lᵀ L x0 (t = τ², 0 for none).
func (c *cg) rhs(dst, y []float64, t float64) {
	sy := c.sy
	for i, v := range y {
		c.wf[i] = sy.w[i] * v
	}
	sy.p.BackProject(dst, c.wf)
	if sy.x0 != nil && t > 0 {
		sy.l.addNormal(dst, sy.x0, c.lx, t)
	}
}

// solveBias sets dst to the constant part (Rᵀ W R + τ² Lᵀ L)⁻¹ τ² Lᵀ L x0.
func (e *engine) solveBias(ctx context.Context, dst []float64, tau float64) error {
	c := newCG(e.sy)
	b := make([]float64, e.sy.nt)
	e.sy.l.addNormal(b, e.sy.x0, c.lx, tau*tau)
	_, err := e.solve(ctx, c, dst, b, tau, true)
	return err
}

func (e *engine) nominalIterations() int {
	if e.dn != nil || e.nominal == nil {
		return 0
	}
	return e.nominal.lastIter
}

// taus returns the values of the scan, increasing: ScanPoints values
// log-spaced in [ScanMin, ScanMax], by default [1e-4 s, 1e3 s] with s the
// scale of the system (see system.scale).
func (e *engine) taus(rs *Settings) []float64 {
	lo, hi := rs.ScanMin, rs.ScanMax
	if lo == 0 || hi == 0 {
		s := e.sy.scale()
		if lo == 0 {
			lo = 1e-4 * s
		}
		if hi == 0 {
			hi = 1e3 * s
		}
	}
	if lo >= hi {
		lo = hi / 1e6
	}
	k := rs.ScanPoints
	out := make([]float64, k)
	a, b := math.Log(lo), math.Log(hi)
	for i := range out {
		out[i] = math.Exp(a + (b-a)*float64(i)/float64(k-1))
	}
	return out
}

// scan solves at every tau of the scan, fills d.Scan and chooses d.Tau
// by rs.Criterion (method.md §14 Choosing tau).
func (e *engine) scan(ctx context.Context, rs *Settings, d *Details) error {
	var gc *globalCorrelation
	var sc *sampledCorrelation
	nt := e.sy.nt
	c := newCG(e.sy)
	c.tol = max(c.tol, rs.ScanTolerance)
	if rs.Criterion == Correlation {
		var err error
		if e.dn != nil && len(e.dn.idx) <= CorrelationLimit {
			gc, err = newGlobalCorrelation(e.dn)
		} else {
			sc, err = newSampledCorrelation(ctx, e, c)
			d.CorrelationSample = len(sc.bins)
		}
		if err != nil {
			return err
		}
	}
	taus := e.taus(rs)
	d.Scan = make([]ScanPoint, len(taus))
	x, b := make([]float64, nt), make([]float64, nt)
	y := make([]float64, e.sy.p.RecoBins())
	copy(y, e.sy.p.Data())
	for i, v := range e.sy.p.Background() {
		y[i] -= v
	}
	// From the smallest tau up: each solution is the next warm start.
	// The normal matrix is best conditioned at small tau (it is then
	// close to Rᵀ V⁻¹ R), and its conditioning worsens as τ² Lᵀ L takes
	// over, so the hard solves start from the nearest solution.
	// The solutions are kept (when small) to start the nominal solve.
	// By conjugate gradients, from the third point on, the start is
	// the linear extrapolation in log tau of the two previous solutions
	// (the grid is uniform in log tau), and the L-curve scan stops once
	// its corner is bracketed (method.md §14 Choosing tau).
	var xs [][]float64
	keep := e.dn == nil && e.sy.x0 == nil && int64(nt)*int64(len(taus))*8 <= warmBytes
	cont := e.dn == nil && !fullScan
	var prev []float64
	if cont {
		prev = make([]float64, nt)
	}
	for k := range taus {
		tau := taus[k]
		if err := e.prepare(tau); err != nil {
			return err
		}
		if cont {
			for j, v := range x {
				if k >= 2 {
					x[j] = 2*v - prev[j]
				}
				prev[j] = v
			}
		}
		c.rhs(b, y, tau*tau)
		ok, err := e.solve(ctx, c, x, b, tau, false)
		if err != nil {
			return err
		}
		pt := ScanPoint{Tau: tau, Converged: ok}
		if e.dn == nil {
			pt.Iterations = c.lastIter
		}
		pt.ResidualNorm, pt.PenaltyNorm = e.sy.norms(x)
		if gc != nil {
			pt.Correlation = gc.average(tau)
		}
		if sc != nil {
			if pt.Correlation, pt.CorrelationError, err = sc.average(ctx, c, tau); err != nil {
				return err
			}
		}
		d.Scan[k] = pt
		if keep {
			xs = append(xs, slices.Clone(x))
		}
		if cont && gc == nil && sc == nil && cornerBracketed(d.Scan[:k+1]) {
			d.Scan = d.Scan[:k+1]
			break
		}
	}
	for k := range d.Scan {
		d.Scan[k].Curvature = 0
	}
	usable := curvatures(d.Scan)
	best := -1
	if gc != nil || sc != nil {
		d.Criterion = ChosenCorrelation
		for k, pt := range d.Scan {
			if best < 0 || pt.Correlation < d.Scan[best].Correlation {
				best = k
			}
		}
		d.AtScanEdge = best == 0 || best == len(d.Scan)-1
	} else {
		d.Criterion = ChosenLCurve
		first, last := -1, -1
		for k, ok := range usable {
			if !ok {
				continue
			}
			if first < 0 {
				first = k
			}
			last = k
			if best < 0 || d.Scan[k].Curvature > d.Scan[best].Curvature {
				best = k
			}
		}
		if best < 0 {
			return &unfold.NumericalError{Reason: "the L-curve does not move over the scanned range of tau (neither the residual nor the penalty changes): widen the scan or give a fixed tau"}
		}
		d.AtScanEdge = best == first || best == last
	}
	d.Tau = d.Scan[best].Tau
	if keep {
		e.warm = xs[best]
	}
	return nil
}

// fullScan switches off the extrapolated starts and the early end of
// the L-curve scan by conjugate gradients (the benchmarks compare).
var fullScan = false

// cornerBracketed reports whether the partial L-curve scan s (the first
// points of the scan, increasing tau) has passed the corner: its usable
// point of largest curvature κ has usable points on both sides (whose
// curvature is then lower) and κ E ≥ 1, with E the extent of the
// partial curve (the diagonal of its bounding box in the log-log plane):
// the curve turns there more sharply than a quarter circle as large as
// the part scanned. The last condition keeps the rounding-level
// wiggles of the first points, where the curve has hardly moved, from
// counting as a corner. It sets the curvatures of s as curvatures does.
func cornerBracketed(s []ScanPoint) bool {
	for k := range s {
		s[k].Curvature = 0
	}
	usable := curvatures(s)
	best := -1
	for k, ok := range usable {
		if ok && (best < 0 || s[k].Curvature > s[best].Curvature) {
			best = k
		}
	}
	if best < 1 || !usable[best-1] || best+1 >= len(s) || !usable[best+1] {
		return false
	}
	e := extent(s)
	return s[best].Curvature*e >= 1 && speed(s, best) > ExtentMargin*StillFraction*e
}

// ExtentMargin is how much the extent of the L-curve may grow beyond
// the points solved before an ended scan without making its chosen
// point one where the curve stands still (method.md §14 Choosing tau).
const ExtentMargin = 1.25

// speed returns the speed of the L-curve of s per unit of log10 tau at
// the inner point k, from central differences.
func speed(s []ScanPoint, k int) float64 {
	h := (math.Log10(s[k+1].Tau) - math.Log10(s[k-1].Tau)) / 2
	u1 := (lg(s[k+1].ResidualNorm) - lg(s[k-1].ResidualNorm)) / (2 * h)
	v1 := (lg(s[k+1].PenaltyNorm) - lg(s[k-1].PenaltyNorm)) / (2 * h)
	return math.Hypot(u1, v1)
}

// extent returns the diagonal of the bounding box of the L-curve of s,
// (log10 |residual|, log10 |penalty|).
func extent(s []ScanPoint) float64 {
	u, v := make([]float64, len(s)), make([]float64, len(s))
	for k, pt := range s {
		u[k], v[k] = lg(pt.ResidualNorm), lg(pt.PenaltyNorm)
	}
	return math.Hypot(slices.Max(u)-slices.Min(u), slices.Max(v)-slices.Min(v))
}

func lg(v float64) float64 { return math.Log10(math.Max(v, 1e-300)) }

// warmBytes bounds the memory of the scan's kept solutions.
const warmBytes = 64 << 20

// curvatures sets the signed curvature of the L-curve
// (log10 |residual|, log10 |penalty|) parametrised by t = log10 tau at
// the inner points, from central differences on the (uniform) grid in t:
// κ = (x′ y″ − y′ x″) / (x′² + y′²)^{3/2} (Hansen and O'Leary 1993).
// The corner of the L has κ > 0 (the curve turns from descending to
// running right). Where the curve moves by less than StillFraction of
// its extent per unit of t, the curvature is rounding noise: it is left
// 0 and the point is not usable. It returns which points are usable.
func curvatures(s []ScanPoint) []bool {
	usable := make([]bool, len(s))
	if len(s) < 3 {
		return usable
	}
	u, v := make([]float64, len(s)), make([]float64, len(s))
	for k, pt := range s {
		u[k], v[k] = lg(pt.ResidualNorm), lg(pt.PenaltyNorm)
	}
	extent := extent(s)
	for k := 1; k+1 < len(s); k++ {
		h := (math.Log10(s[k+1].Tau) - math.Log10(s[k-1].Tau)) / 2
		u1, v1 := (u[k+1]-u[k-1])/(2*h), (v[k+1]-v[k-1])/(2*h)
		u2, v2 := (u[k+1]-2*u[k]+u[k-1])/(h*h), (v[k+1]-2*v[k]+v[k-1])/(h*h)
		speed := math.Hypot(u1, v1)
		if !(speed > StillFraction*extent) {
			continue
		}
		s[k].Curvature = (u1*v2 - v1*u2) / (speed * speed * speed)
		usable[k] = true
	}
	return usable
}
