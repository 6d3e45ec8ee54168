// Package unfold is the seam shared by the unfolding methods of desmear.
// It holds what every method needs and none of the methods themselves
// (the iterative Bayesian method is package unfold/methods/bayes):
//
//   - Problem, the inputs: the migrations A_ij (weighted simulated count
//     generated in truth bin j and reconstructed in reco bin i), the
//     generated counts G_j, the data n_i with optional variances, an
//     optional expected background b_i with optional variances, and an
//     optional prior.
//   - Prepared, the validated problem (Prepare): the response
//     R_ij = A_ij / G_j (never stored), the efficiencies
//     eps_j = Σ_i R_ij, the determined truth bins (eps_j > 0; the others
//     are reported as not determined with estimate 0), 1/G, the data and
//     variances as they enter the fit, the fold R x and the
//     back-projection Rᵀ y. With Settings.Background = Subtract the
//     background is removed from the data first, n' = max(n − b, 0),
//     with var n' = var n + var b (0 where clipped); with InModel it
//     enters the expectation ν = R μ + b.
//     A Prepared is reused for ensembles of unfoldings of one response:
//     SetData, SetPrior and SetResponse (same sparsity pattern) replace
//     the data, the prior or the response values in its own buffers,
//     validated as by Prepare, without allocating; a method's reusable
//     form (bayes.Unfolder) then unfolds it again without allocating.
//   - Settings, the settings every method shares (background mode and
//     uncertainty computation), besides each method's own settings type.
//   - Method and Fit, the interface a method implements, and Result, the
//     common outcome, with the method's own Details.
//   - The uncertainty drivers, and the errors.
//
// # Uncertainties
//
// The data-statistical uncertainty of a linear or linearised method is
// V = J diag(var n) Jᵀ (+ J_b diag(var b) J_bᵀ when the background
// variance is propagated), J = dμ/dn. Settings.Covariance selects:
//
//   - Full: the method fills the dense Jacobian (Fit.Jacobian; two
//     buffers of 8·n_t·n_r bytes) and V comes from one general matrix
//     multiply, unless the method carried V along its own recursion
//     (Jacobian.Covariance, asked for by Jacobian.ColumnVariances). It
//     is refused with a *TooLargeError when 16·n_t·n_r + 8·n_t² bytes
//     (+ 8·n_t·(n_t − n_r) for a work matrix of V's size when n_t > n_r)
//     exceed Settings.MemoryLimit (default 4 GiB); with a propagated
//     background variance n_r counts twice.
//   - Diagonal: per-bin variances, by DiagonalExact (the diagonal of the
//     exact V from the dense Jacobian, when it fits), DiagonalProbes (S
//     random Rademacher probes z_s, (z_s)_i = ±sqrt(var n_i), propagated
//     by the method as Jacobian-vector products, Fit.Tangents, in batches
//     within half the memory limit and ProbeBatchBytes, swept together in
//     blocks of ProbeBlock; Var μ_j ≈ mean_s (J z_s)_j², relative
//     precision of a variance at most sqrt(2/S)) or DiagonalToys (Poisson
//     pseudo-data on which the method re-runs with the same
//     regularisation, Fit.NewToyRunner, or in blocks of ToyBlock toys
//     when the fit is a ToyBlocker and a block fits within half the
//     memory limit; precision sqrt(2/(T−1))).
//     DiagonalAuto picks exact when the Jacobian fits under the memory
//     limit and probes otherwise.
//
// DiagonalGamma draws the data expectation from the Gamma posterior of
// each count instead of Poisson pseudo-data (method.md §20).
//
// The statistics of the simulation behind the response are a source of
// their own (SourceSimulation, Result.Sources): with
// Settings.ResponseSamples > 0 every response column is sampled from the
// Dirichlet posterior of its effective counts (Problem.GeneratedSumW2;
// DirichletParams, SampleResponse), each sampled response is unfolded
// with the nominal data on a worker's own Prepared (SetResponse), reusing
// the method's work when it is a Refitter, and the ensemble's covariance
// is added to the data's (method.md §20). The Poisson bootstrap of the
// simulated events (Settings.Replicas, method.md §25) needs the events,
// so the analysis run computes it: it builds the replicas' responses and
// unfolds them with UnfoldEach, and EnsembleSource turns the ensemble
// into the source (method MethodReplicas).
//
// The drivers plan the memory, draw the probes and the pseudo-data and
// accumulate the variances; the method supplies only the propagation
// through its own algorithm. A fit whose estimate is the last of a
// sequence of steps it keeps (Stepper: the iterations of the iterative
// method with its scan) reports every step while it propagates, and the
// drivers record the per-bin variance of each in Result.StepVariance in
// the same run.
//
// The uncertainty is kept by source (Result.Sources, added with
// AddSource, which keeps the totals): the data's statistics, the
// simulation's, and one source per systematic variation, built by
// ShiftSource (a varied estimate minus the nominal one) or PairSource
// (the half-difference of an up/down pair), whose covariance is the
// outer product of the shift (method.md §21); CheckSourceCovariances
// refuses dense source covariances above the memory limit.
//
// Quantities derived from the estimate (Problem.Derived: a Derived gives
// its Jacobian D at the estimate as a RowMatrix, Result.DerivedJacobians)
// get their covariance D Cov Dᵀ from every source by itself, without the
// full covariance (Source.Derived, summed by Result.DerivedCovariance;
// method.md §22): from the dense Jacobian for the exact variances, from
// the same probes, from ensembles of D μ_k of the same toys, samples and
// replicas (DerivedEnsembles, AddDerived, UnfoldEachFunc), and from D
// times a shift; Unfold refuses derived quantities whose dense
// covariances would not fit under the memory limit.
//
// # Conventions
//
// Unfold returns errors for everything that depends on the inputs:
// *InputError (inconsistent or invalid Problem), *SettingsError,
// *TooLargeError, *NumericalError, and ctx.Err() when cancelled. Panics
// are reserved for programmer errors. Random numbers come from
// math/rand/v2 PCG generators seeded with Settings.Seed and one stream per
// probe, toy or sample (Result.Streams), so a probe, toy or sample does
// not depend on the batch or the goroutine it runs on; all sums run in fixed orders, so results are
// bit-identical for equal inputs and seed whatever the number of cores.
package unfold
