// Package demo generates desmear's built-in example: an invented but
// physically sensible double-differential measurement, with a fixed
// seed, written as the event files and the analysis file a physicist
// would start from.
//
// # The scenario
//
// A made-up particle, the "zeton", is produced in the collisions of an
// imaginary machine (the "demo run") and measured in its transverse
// momentum pt (GeV) and absolute rapidity |y|. Nothing comes from a real
// experiment. The generator-level spectrum falls steeply in pt (a power
// law, pt^-n above 15 GeV) and mildly in |y| (1 − |y|²/c² on |y| < 3).
// The simulation and the pseudo-data differ in shape: the pseudo-data
// have a harder pt slope (n = 3.8 against 4.0) and a |y| shape that
// falls faster (c = 3.8 against 4.5), and a 10% different normalisation,
// so that the unfolded result is not just the prior.
//
// The detector: an efficiency below one everywhere (a turn-on in pt and a
// loss at large |y|), a momentum resolution σ(pt)/pt = 3% ⊕ 0.04%·pt with
// a 1.5% scale offset, a rapidity resolution of 0.03, and the acceptance
// |y| < 2.5 at both levels (the fiducial truth-level selection). A few
// percent of the reconstructed candidates are fakes, from a
// background-like source falling exponentially in pt and flat in |y|.
//
// The truth binning has a central region with a different pt binning in
// each of its two rapidity slices (edges by bin) and a rectangular
// forward region of two rapidity slices, with pt under- and overflow;
// the reco binning splits every truth pt bin in two. See TruthScheme,
// RecoScheme and the files they write.
//
// The bins are narrow enough in |y| that the efficiency varies little
// inside each of them: an efficiency that changes across a bin makes the
// bin's average efficiency depend on the spectrum's shape inside it, a
// model dependence of the response that no iteration removes. With these
// bins it is below a fifth of the statistical uncertainty at the default
// size (checked with 20 times the default statistics).
//
// # Files
//
// Generate writes into one folder: simulation.root and
// simulation.parquet (the same simulated events: pt_true, y_true,
// pt_reco, y_reco, weight, pass_truth, pass_reco), data.root and
// data.parquet (the pseudo-data: pt, y), truth-binning.yaml,
// reco-binning.yaml, analysis.yaml (the simulation from ROOT, the data
// from Parquet), stress-test.yaml (the same analysis with the simulation
// reweighted to the pseudo-data's true spectrum, see ReweightExpression),
// truth.csv (the known truth of the pseudo-data) and scenario.json (the
// parameters). The simulation is generated with a
// harder pt spectrum and weighted to its own model (importance sampling),
// so its weights vary; the weighted sums are expected counts of the
// pseudo-data. Values that do not exist (the truth of a fake, the reco
// values of a zeton that was not reconstructed) are -999.
//
// # Conventions
//
// Deterministic: events are generated in chunks of 65536, chunk c of a
// sample drawing from rand.NewPCG(seed, stream<<32|c), so the same
// Config gives the same events, and the same bytes in every file except
// the ROOT files' write times, whatever the number of cores.
//
// The known truth (Truth.Expected) is the expected count per truth bin,
// the closed-form integral of the generator's densities: that is what an
// unfolded spectrum estimates. The realised counts (Truth.Generated)
// fluctuate around it together with the data and are kept for reference.
//
// Errors: a size out of range, an existing output folder and file-system
// problems are returned as errors; a cancelled context stops the
// generation and leaves nothing behind. The package panics only on
// programmer errors: its own built-in binnings failing to decode (a
// bug), or ExpectedTruth given a scheme with an axis other than y and
// pt.
package demo
