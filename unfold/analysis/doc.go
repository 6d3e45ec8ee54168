// Package analysis reads an analysis file and runs the whole job of an
// unfolding measurement: it builds the response from simulated events
// (or loads a saved one), fills the data and the backgrounds, unfolds
// with the iterative kernel of package unfold and writes the result
// folder.
//
// # The analysis file
//
// An analysis file is YAML with these sections (every key is described,
// with a complete commented example, in the project's reference page):
//
//	binning       truth and reco binning schemes, by path (relative to the
//	              analysis file) or inline, in package binning's YAML format
//	observables   per axis of each scheme, an expression over the input
//	              columns, separately for truth and reco ("abs(y_true)")
//	simulation    the simulated samples: file, ROOT tree, weight, truth and
//	              reco selections, optional scale and per-sample observables
//	response      optionally, a saved response bundle to load instead
//	data          an events file, a ROOT TH1D/TH2D, or a plain table n.csv
//	backgrounds   optional: events files or plain tables, each with a scale
//	              and the scale's relative uncertainty
//	unfolding     iterations or a stopping rule, prior, smoothing,
//	              background handling, what to do with the fakes
//	uncertainty   covariance none|diag|full, method, probes, toys, seed
//	output        result folder, formats, integrated luminosity
//	processing    worker goroutines and batch size
//	variations    systematic variations: an alternative simulation, a
//	              reweighting, a background scale or replaced reco
//	              observables, alone or as an up/down pair; each unfolded
//	              with the nominal settings into a source of uncertainty
//
// Decoding is strict: an unknown key, a value of the wrong type, an
// unknown axis name or choice, or a missing required key is an *Error
// (several at once: Errors) naming the file, the line and the field.
// Problems inside an inline binning scheme are *binning.Error values that
// keep the analysis file's line numbers. Expressions are compiled when
// the job runs, against the columns of each events file: an unknown
// column is an *Error at the line of the expression that lists the
// file's columns.
//
// # Running
//
// Load (or Decode) gives an *Analysis; BuildResponse, FillData,
// Background, Problem and Settings expose each step, and Run does all of
// them and writes the result folder atomically (a temporary folder
// renamed into place; a failed or interrupted run leaves nothing). Run
// is Nominal (the nominal unfolding), Nominal.Replicas for the units of
// the bootstrap replicas, Nominal.Vary for each systematic variation and
// Nominal.Finish (the sources added, the result written): the replica
// units and the variations can be computed in other processes and given
// to Finish, with the same result bit for bit. The
// folder holds result.json (the plain-table result fields plus binning
// labels, efficiency, purity, stability, densities, settings, input
// files with SHA-256 hashes, program version and seed), result.csv, one
// region-NAME.csv per truth region (bin edges, counts and densities with
// uncertainties) and result.root (one TH1D per slice along the last axis
// of every region, of counts and of densities, and a TH2D of each
// rectangular 2-D region; flow bins in ROOT's flow cells).
//
// Every step streams its events through package response, so the memory does
// not grow with the number of events and the results are the same bits
// whatever the number of worker goroutines. Nothing is printed: progress
// goes to a callback in Options.
package analysis
