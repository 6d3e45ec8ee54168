// Package tables reads and writes the plain-table form of an unfolding
// problem: small CSV files that carry a response histogram, the
// generated truth spectrum, the data, the expected background and a prior,
// as produced by any analysis framework.
//
// # Formats
//
// Every table is a CSV file with a header row naming its columns, one
// row per bin or cell, and optional lines starting with '#' (comments,
// ignored). Blank lines are ignored. Indices are 0-based global bin
// indices (see package binning); values are decimal floating-point
// numbers.
//
//	table       columns (the last one optional)   meaning
//	response    reco,truth,value[,sumw2]          A_ij: weighted count generated in truth bin j and reconstructed in reco bin i
//	generated   truth,value[,sumw2]               G_j: weighted count generated in truth bin j, reconstructed or not
//	data        reco,value[,variance]             n_i: measured count; variance defaults to n_i (Poisson)
//	background  reco,value[,variance]             b_i: expected background (fakes, other processes)
//	prior       truth,value                       p_j: starting spectrum of the iteration
//
// The columns may come in any order; the names are matched without
// regard to case or surrounding spaces. Unknown columns are refused, so a
// misspelt "sumw2" is not silently dropped.
//
// # Validation
//
// Every problem in a table is an *Error naming the file, the line and the
// column: a malformed row (wrong number of fields), an index that is not
// a non-negative integer, a value that is not a number, NaN, ±Inf or
// negative (the tables hold counts and sums of squared weights, which
// cannot be negative; only a response cell's value may be, from negative
// event weights, and is left to the negative-cell remedy of the
// unfolding, which refuses it by default), and a row repeated for the
// same bin or cell.
// Repeated rows are refused rather than summed: a plain table is a
// histogram with one row per filled cell, and a repeated row almost
// always means two files were concatenated or an index mapping is wrong;
// summing would double-count silently. Aggregate before writing if the
// rows really are partial sums.
//
// Set.Assemble checks the tables against each other and against the
// bin counts: indices beyond the sizes, an empty response, a truth bin
// with response entries but no generated count, and a truth bin whose
// response entries add up to more than its generated count (an
// efficiency above 1, beyond a relative rounding allowance of
// EfficiencyTolerance).
//
// Errors from the underlying reader (a failing disk, for example) are
// returned as they are, wrapped with the file name, and are not *Error
// values. Nothing in this package panics on any input; it panics only
// for programming errors: an invalid Kind, Assemble without the
// response, generated or data table, or WriteVector with a second
// column of the wrong length or for the prior.
package tables
