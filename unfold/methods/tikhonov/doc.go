// Package tikhonov is Tikhonov-regularised least-squares unfolding behind
// the seam of package unfold, on the same sparse problem as the
// iterative method:
//
//	x = argmin (R x + b − n)ᵀ V⁻¹ (R x + b − n) + τ² |L (x − x0)|²,
//
// with R_ij = A_ij / G_j the response (so that R x + b is the folded
// expectation), V diagonal from the data variances (a bin without
// variance, a zero count with Poisson data, gets variance 1), x0 zero or
// the scaled prior (Settings.Bias), and L the penalty built from the
// truth binning (Settings.Truth): second (or first, Settings.Penalty)
// differences along each axis of each region, on the bin index or
// (Settings.Widths) on the densities over the distances of the bin
// centres. Flow bins and undetermined bins carry no penalty rows, and
// along an axis whose next axis has edges by bin there are none either
// (the slices are not consecutive bins).
//
// The minimum solves the normal equations
//
//	(Rᵀ V⁻¹ R + τ² Lᵀ L) x = Rᵀ V⁻¹ (n − b) + τ² Lᵀ L x0,
//
// densely (gonum Cholesky) up to DenseLimit truth bins and by
// conjugate gradients preconditioned with the diagonal above, applying
// R and Rᵀ sparsely (unfold.Prepared.Fold, BackProject); the conjugate
// gradients stop when the residual is below Settings.Tolerance
// (DefaultTolerance) times the right-hand side. All sums run in fixed
// order, so the bits do not depend on the number of cores.
//
// The estimate is linear in n and b for fixed τ, so its Jacobian is
// exact (unfold.NewLinearFit): every uncertainty mode of unfold works.
//
// τ is fixed (Settings.Tau) or chosen from a log-spaced scan by the
// L-curve (maximum curvature of log |residual| against log |penalty|;
// P. C. Hansen and D. P. O'Leary, SIAM J. Sci. Comput. 14 (1993) 1487)
// or by the minimum average global correlation, computed exactly up to
// CorrelationLimit determined truth bins and estimated from a sample of
// CorrelationSample bins above. The scan is
// in the details (Details.Scan). An L-curve scan by conjugate gradients
// starts each point from the extrapolation of the two previous solutions
// and ends once the curvature maximum is bracketed (ExtentMargin), so
// its table may stop short of the last tau.
//
// The formulas are in cmd/desmear/help/method.md, §13 and §14.
package tikhonov
