package tikhonov

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/unfold"
)

// Name is the method's name in unfold.Result.Method and in the method
// choice of the analysis file and the command line.
const Name = "tikhonov"

// The values of Details.Criterion.
const (
	ChosenFixed       = "fixed"
	ChosenLCurve      = "lcurve"
	ChosenCorrelation = "correlation"
)

// Details are what a Tikhonov fit reports besides the estimate.
type Details struct {
	// Tau is the regularisation strength used.
	Tau float64
	// Criterion says how it was chosen: ChosenFixed, ChosenLCurve or
	// ChosenCorrelation.
	Criterion string
	// Penalty and Bias are the text names of the settings used; Widths
	// whether the differences were divided by bin widths.
	Penalty, Bias string
	Widths        bool
	// PenaltyRows is the number of rows of L.
	PenaltyRows int
	// Solver is "dense" (gonum Cholesky) or "cg" (sparse conjugate
	// gradients); CGIterations the iterations of the nominal solve (0
	// for dense).
	Solver       string
	CGIterations int
	// ResidualNorm is |W^½ (R x + b − n)| and PenaltyNorm |L (x − x0)|
	// of the estimate.
	ResidualNorm, PenaltyNorm float64
	// Scan is the scan of tau in increasing order (empty for a fixed
	// tau; an L-curve scan by conjugate gradients ends once its corner
	// is bracketed, method.md §14); AtScanEdge reports that the chosen
	// tau is the first or last point at which the criterion is defined,
	// so that the optimum may lie outside the range scanned.
	Scan       []ScanPoint
	AtScanEdge bool
	// CorrelationSample is the number of truth bins over which the
	// average global correlation was estimated (0: computed exactly over
	// all determined bins).
	CorrelationSample int
}

// ScanPoint is one value of tau of a scan.
type ScanPoint struct {
	Tau float64
	// ResidualNorm and PenaltyNorm are as in Details.
	ResidualNorm, PenaltyNorm float64
	// Curvature is the signed curvature of the L-curve at this point
	// (0 at the two ends, where it is not defined).
	Curvature float64
	// Correlation is the average global correlation (correlation
	// criterion only, else 0); CorrelationError its standard error when
	// it is estimated from a sample of bins (else 0).
	Correlation      float64
	CorrelationError float64
	// Converged is false when the conjugate gradients stopped at the
	// iteration bound before the scan's tolerance (the point is then
	// less precise); always true for the dense solve. Iterations are
	// the conjugate-gradient iterations of the point (0 for dense).
	Converged  bool
	Iterations int
}

// DetailsOf returns the details of a result of this method, or nil
// when r came from another method.
func DetailsOf(r *unfold.Result) *Details {
	d, _ := r.Details.(*Details)
	return d
}

// Name returns the method's name.
func (s *Settings) Name() string { return Name }

// Validate checks the settings.
func (s *Settings) Validate() error {
	_, err := s.check()
	return err
}

// Fit solves the regularised least squares on p. The result's Details
// are a *Details.
func (s *Settings) Fit(ctx context.Context, p *unfold.Prepared) (unfold.Fit, error) {
	rs, err := s.check()
	if err != nil {
		return nil, err
	}
	l, err := newPenalty(rs.Truth, p.TruthBins(), p.Determined(), rs.Penalty, rs.Widths)
	if err != nil {
		return nil, err
	}
	var x0 []float64
	if rs.Bias == PriorBias {
		x0 = priorBias(p)
	}
	sy := newSystem(p, l, x0, rs.Tolerance, rs.MaxIterations)
	e := newEngine(sy, rs.Solver == DenseSolver || rs.Solver == AutoSolver && p.TruthBins() <= DenseLimit)
	d := &Details{Penalty: rs.Penalty.String(), Bias: rs.Bias.String(), Widths: rs.Widths, PenaltyRows: l.rows(), Solver: e.kind()}
	if rs.Tau > 0 {
		d.Tau, d.Criterion = rs.Tau, ChosenFixed
	} else {
		if err := e.scan(ctx, &rs, d); err != nil {
			return nil, err
		}
	}
	if err := e.prepare(d.Tau); err != nil {
		return nil, err
	}
	var offset []float64
	if x0 != nil {
		offset = make([]float64, p.TruthBins())
		if err := e.solveBias(ctx, offset, d.Tau); err != nil {
			return nil, err
		}
	}
	f, err := unfold.NewLinearFit(ctx, p, func() unfold.Solver { return e.solver(d.Tau) }, offset, d)
	if err != nil {
		return nil, err
	}
	d.ResidualNorm, d.PenaltyNorm = sy.norms(f.Estimate())
	d.CGIterations = e.nominalIterations()
	return f, nil
}

// priorBias returns the prior scaled so that Σ eps x0 = Σ (n − b).
func priorBias(p *unfold.Prepared) []float64 {
	var net float64
	for _, x := range p.Data() {
		net += x
	}
	for _, x := range p.Background() {
		net -= x
	}
	x0 := make([]float64, p.TruthBins())
	for j, v := range p.Prior() {
		x0[j] = v * net / p.FoldedPrior()
	}
	return x0
}

// norms returns |W^½ (R x − y)| and |L (x − x0)| for the nominal data,
// y = n − b.
func (sy *system) norms(x []float64) (res, pen float64) {
	nr := sy.p.RecoBins()
	fold := make([]float64, nr)
	sy.p.Fold(fold, x, make([]float64, sy.nt))
	b := sy.p.Background()
	for i, n := range sy.p.Data() {
		r := fold[i] - n
		if b != nil {
			r += b[i]
		}
		res += sy.w[i] * r * r
	}
	dx := append([]float64(nil), x...)
	for j, v := range sy.x0 {
		dx[j] -= v
	}
	return sqrt(res), sqrt(sy.l.norm2(dx, make([]float64, sy.l.rows())))
}

// errNotConverged is the error of a solve that did not reach the
// tolerance within the iteration bound.
func errNotConverged(c *cg, tau float64) error {
	return &unfold.NumericalError{Reason: fmt.Sprintf("the conjugate gradients at tau = %g stopped at %d iterations with a relative residual of %.3g, above the tolerance %g; raise tau, the tolerance or the iteration bound", tau, c.lastIter, c.lastRes, c.tol)}
}
