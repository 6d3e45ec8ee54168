// Package validate measures how an unfolding method behaves on problems
// whose truth is known: toy ensembles scanning the regularisation
// strength (the number of iterations of the iterative method), closure
// tests, stress tests, and a recommendation of the regularisation by a
// documented criterion.
//
// # Toy ensembles
//
// A toy is Poisson pseudo-data n_i ~ Poisson(ν_i) drawn from
// ν = R t + b, with t the chosen truth, R the problem's response and b its
// expected background (held fixed). Toy t draws from its own PCG stream
// (math/rand/v2, seeded with Config.Seed and the toy number), so a toy's
// pseudo-data do not depend on how the ensemble is split or scheduled.
// Each toy is unfolded with the method at every regularisation
// k = 1..MaxK. A method that passes through the strengths in order and
// keeps them (a Scanner: the iterative method, whose iteration k is the
// estimate of k iterations) is run once per toy at MaxK with every step
// kept, its uncertainty propagation recording the variance at every
// step on the way (unfold.Result.StepVariance): MaxK iterations and one
// propagation per toy, the same bits as one run per k. Any other method
// is re-run per k. The uncertainty of each toy's estimate is the linearised
// per-bin diagonal (unfold.Diagonal with DiagonalAuto: the exact
// diagonal of the first-order covariance when the dense Jacobian fits,
// random probes otherwise), evaluated at that toy's own data: it is what
// a user would quote on data like the toy's.
//
// Toys are accumulated in blocks of BlockToys consecutive toys, in toy
// order within a block (Welford's update), and blocks are combined in
// block order with the pairwise merge of Chan, Golub and LeVeque. An
// ensemble computed in one run and one split at block boundaries across
// several runs and merged (Merge) therefore hold the same blocks and
// give the same bits.
//
// # Truths
//
// The toys are drawn from a truth given per truth bin: the generated
// spectrum scaled to the data (ScaledGenerated), a reweighted one
// (Reweighted, with the weights of a linear Tilt or of a weight
// expression over the truth axes evaluated at the bin centres, Weights),
// or the nominal result itself (Options.TruthFromResult: the toys are
// its refold). The stress tests use the same reweighted truths without
// fluctuations.
//
// # Figures of merit
//
// For every k and truth bin j, over T toys: the bias (mean estimate −
// t_j), the variance of the estimate, the pulls (estimate − t_j)/σ_j
// (mean and width), the coverage (the fraction of toys whose interval
// estimate ± σ_j contains t_j) and, summed over the bins, the mean
// squared error Σ_j (estimate − t_j)² and its 1/t_j-weighted form. Each
// figure comes with its statistical precision from the finite toy count
// (see Point). The formulas are in the reference page on validation.
//
// # Cost
//
// BENCHMARKS.md beside this file records the time of a validation of
// the demo with the default toy count.
package validate
