// Package derive computes quantities derived linearly (to first order)
// from an unfolded result, with their covariance propagated exactly:
// projections of a truth region onto some of its axes (sums over the
// others), normalised shapes, differential densities and the division
// by an integrated luminosity.
//
// # Quantities
//
// A Spec names a region of the truth binning, the axes kept (the others
// are summed over; none listed keeps every axis) and a Kind:
//
//	projection  y_t = Σ_{g→t} μ_g                          (sums over the other axes)
//	density     y_t = Σ_{g→t} μ_g / (Π_{a∈W} w_a(t) · L)    (W: DivideByWidths, L: luminosity)
//	shape       y_t = s_t / S_{k(t)} / Π_{a∈W} w_a(t),      s = the projection, S_k = Σ_{u∈k} s_u
//
// where the groups k of a shape are the whole projection, or its slices
// along the axes listed in PerSlice (one group per combination of bins
// of those axes). Only in-range bins enter: flow bins of the truth
// binning are left out of every derived quantity. The binning has no
// notion of a count axis (a multiplicity, whose width must not divide),
// so the axes whose widths divide are listed explicitly: a density lists
// at least one, a shape may list some, a projection none. A shape does
// not depend on the luminosity, so a shape with the luminosity is
// refused.
//
// # Propagation
//
// y = f(μ) is linear in μ for a projection and a density and nonlinear
// for a shape; in every case the covariance is Cov_y = D Cov_μ Dᵀ with D
// the Jacobian ∂y/∂μ at the estimate (exact for the linear kinds, first
// order for a shape). D = W⁻¹ J P, with P the 0/1 projection, J the
// Jacobian of the normalisation, block diagonal over the groups with
// blocks (I − y 1ᵀ)/S_k (J = I for the linear kinds), and W the diagonal
// of the divisors. Covariance computes P Cov Pᵀ in one pass over the
// region's bins and then applies J and W through their structure, in
// O(m²) for m derived bins; Jacobian returns D itself as a sparse matrix
// (compressed rows, unfold.RowMatrix), which makes a Quantity an
// unfold.Derived: given in unfold.Problem.Derived, every source of
// uncertainty propagates its covariance by itself, without the full
// covariance of the estimate. See method.md, the section on derived
// quantities.
//
// The covariance of a shape is singular by construction: 1ᵀ J = 0 in
// every group, so (1, ..., 1) over a group (weighted by the widths when
// they divide) is in its kernel; a chi-square with a shape must leave one
// bin out per group or use a pseudo-inverse.
//
// # Errors
//
// New returns a *SpecError, naming the field of the Spec, for every
// problem of a specification. Wrong lengths passed by code panic.
package derive
