// Package bayes is the iterative Bayesian unfolding method of desmear
// behind the seam of package unfold: the D'Agostini iteration (G. D'Agostini, Nucl. Instrum. Meth. A362 (1995)
// 487), which is the EM algorithm for Poisson data (Richardson 1972; Lucy
// 1974; Shepp and Vardi 1982), run on a sparse response across all axes at
// once, with the statistical uncertainty of the data propagated through
// every iteration.
//
// # The method
//
// The inputs (see Problem) are the migrations A_ij (weighted simulated
// count generated in truth bin j and reconstructed in reco bin i), the
// generated counts G_j, the data n_i and an optional expected background
// b_i. The response is R_ij = A_ij / G_j and the efficiency
// eps_j = Σ_i R_ij. A truth bin with eps_j = 0 cannot be measured: it is
// reported as not determined (unfold.Result.Determined false, estimate 0) and is
// excluded from the iteration.
//
//   - Start: μ(0) = p · Σ_i (n_i − b_i) / Σ_j eps_j p_j, the prior p
//     (default G) scaled so that Σ_j eps_j μ_j(0) = Σ_i (n_i − b_i).
//   - Iterate: ν_i = Σ_j R_ij μ_j + b_i and
//     μ_j ← (μ_j / eps_j) Σ_i R_ij n_i / ν_i.
//     A reco bin with ν_i = 0 contributes nothing.
//
// Each iteration is one fused pass over the matrix
// (sparse.Matrix.SweepHooks): the sweep gathers g_j = (Rᵀ y)_j with
// y = n/ν, forms μ_j' = μ_j g_j / eps_j and scatters R μ' into the next
// fold; as each fixed row range of that fold is final, the sweep's rows
// hook forms the next ν, n/ν and the range's share of the
// log-likelihood, and as each column block is updated, its column hook
// sums χ² and the change over each chunk of truth bins once the last
// of the blocks the chunk overlaps is updated (on amd64 with AVX the
// runs without the log-likelihood form n/ν four reco bins at a time,
// with the same correctly rounded operations and bits). The
// log-likelihood is
// summed within each row range of the matrix (sparse.Matrix.RowRanges)
// and the ranges in order; χ² and the change within fixed chunks of
// truth bins and the chunks in order. Runs whose details are not kept
// (toys, the re-runs of the uncertainties, refits, an Unfolder with
// RecordLogLikelihood(false)) skip the log-likelihood; the estimates
// keep their bits.
//
// With unfold.Settings.Background = unfold.Subtract the background is removed from the
// data first, n' = max(n − b, 0), and the iteration runs with b = 0 in ν;
// the variance of n' is var n + var b (0 where clipped).
//
// # Stopping
//
// Either a fixed number of iterations K (Settings.Iterations, default
// DefaultIterations), or the first k ≥ 1 with χ²(k) ≤ Settings.StopChi2,
// at most Settings.MaxIterations, where
//
//	χ²(k) = Σ_j eps_j (μ_j(k) − μ_j(k−1))² / μ_j(k)
//
// over the determined bins with μ_j(k) > 0. The denominator μ_j(k)/eps_j
// is the Poisson variance of a bin-by-bin estimate n_j/eps_j, so χ²(k) is
// the change between successive iterations in units of a rough
// statistical variance of each bin. Every iteration is recorded in
// Details.History with χ², the relative change Σ|Δμ|/Σμ and the Poisson
// log-likelihood Σ_i (n_i ln ν_i − ν_i).
//
// # Smoothing
//
// Settings.Smoothing smooths μ after every iteration,
// μ ← (1−W) μ + W S μ, with S the product of total-preserving (1,2,1)/4
// kernels along each axis of the truth binning, inside a region and
// never across regions or into flow bins (the EMS
// scheme of Silverman et al., JRSS B 52 (1990) 271). Smoothing breaks the
// monotone likelihood of the plain EM iteration.
//
// # Uncertainties
//
// The data uncertainty is propagated to first order through all
// iterations, including the dependence of the unfolding matrix on the
// previous iteration. Differentiating the update (with g = Rᵀ(n/ν)):
//
//	dμ_j' = (g_j/eps_j) dμ_j + (μ_j/eps_j) [Rᵀ (dn/ν − n (R dμ + db)/ν²)]_j
//
// so the Jacobian M(k) = dμ(k)/dn obeys
//
//	M(k+1) = diag(g/eps) M(k) + diag(μ(k)/eps) [Rᵀ diag(1/ν) − Rᵀ diag(n/ν²) R M(k)]
//
// (diag(g/eps) = diag(μ(k+1)/μ(k)) where μ(k) > 0), and the Jacobian with
// respect to the background has the source term −Rᵀ diag(n/ν²) instead of
// Rᵀ diag(1/ν). The start depends on the data through the scaling:
// M(0) = p 1ᵀ / Σ_j eps_j p_j, and −M(0) with respect to b. With smoothing
// of strength W, every step is followed by M ← (1−W) M + W S M, as the
// estimate is by μ ← (1−W) μ + W S μ. The covariance is
// V = M diag(var n) Mᵀ (+ M_b diag(var b) M_bᵀ when Problem.BackgroundVariance
// is given), var n = n unless Problem.DataVariance is given.
//
// The drivers of package unfold choose and plan the computation
// (unfold.Settings.Covariance, the memory limit); this package supplies
// the propagation through the iteration:
//
//   - the dense Jacobian (Fit.Jacobian, two row-major buffers) is updated
//     every iteration with the sparse operators Rᵀ diag(n/ν²) R and
//     Rᵀ diag(1/ν) applied to dense column blocks; when the full
//     covariance is asked (and there is no smoothing) V itself is
//     carried along as well, V(k+1) = X + Xᵀ + N D Nᵀ with
//     X = M(½ (M V(k))ᵀ + J(k) D Nᵀ) for J(k+1) = M J(k) + N, the same
//     sparse operators on dense column blocks of V: about 2 nnz(A) n_t
//     multiply-adds per iteration in place of the n_t² n_r / 2 of the
//     product J D Jᵀ (method.md §8), and bit for bit the same on any
//     number of cores;
//   - the random probes (Fit.Tangents) are Jacobian-vector products
//     through the same recursion, one fused sweep per block of
//     unfold.ProbeBlock probes and iteration (per probe with smoothing),
//     every probe with the bits it gets alone;
//   - the Poisson toys (Fit.NewToyRunner) are unfolded with the same
//     number of iterations as the data; without smoothing they go in
//     blocks of unfold.ToyBlock (Fit.NewToyBlockRunner), one
//     sparse.SweepBlock per block and iteration, every toy with the bits
//     it gets alone.
//
// # Re-runs
//
// The uncertainties re-run the iteration with the number of iterations
// the nominal run made, carrying the dense Jacobian or a batch of probes
// along; toys iterate pseudo-data as many times. The iteration is
// deterministic, so a re-run retraces the nominal one bit for bit.
//
// # Conventions
//
// Errors are those of unfold.Unfold (*unfold.InputError,
// *unfold.SettingsError, *unfold.TooLargeError, *unfold.NumericalError,
// ctx.Err()); every iteration and probe batch checks the context. All
// sums run in fixed orders, so results are bit-identical for equal
// inputs and seed whatever the number of cores.
package bayes
