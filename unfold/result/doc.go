// Package result is the result layer of both modes of desmear unfold:
// the one result document (Result, the schema of result.json), the
// writers of the result folder, one per output format, and the folder
// itself, written atomically.
//
// # The document
//
// Result holds the fields of every result (estimate, uncertainty,
// covariance, efficiency, iterations, settings, input files with their
// SHA-256, binnings) and, filled by an analysis run only and left out of
// the JSON when empty, those of the analysis (purity, stability,
// densities, luminosity, response summary, data counts). FromUnfold fills
// it from the kernel's result and guarantees that no number is NaN or
// infinite (JSON has no such values; bins the response cannot measure
// are flagged in Determined and hold 0).
//
// # Formats
//
// Each output format is a Writer registered by name in its own file of
// this package:
//
//	json     result.json       json.go     the document; always written
//	csv      result.csv        csv.go      one row per truth bin
//	diagnostics  reco-bins.csv, truth-bins.csv, correlation.csv, history.csv, response.csv
//	                           diagnostics.go  data against the folded estimate, per-bin checks
//	iterations  iterations.csv, iterations-bins.csv  iterations.go  the iteration scan (Scan);
//	                                       not a default format
//	record   record/*.yaml     record.go   the data-record tables (submission file, a table per slice, covariances)
//	regions  region-NAME.csv   regions.go  per truth region: edges, volume, counts and densities
//	report   plots/*.png|svg, report.html  report.go, plots.go, html.go  the plots (package figure) and the page
//	root     result.root       root.go     TH1D per slice, TH2D per rectangular 2-D region,
//	                                       correlation and response TH2D per region
//
// The last three need a truth binning and are written only when one is
// given. Write writes a chosen list of formats into a folder; Formats
// lists the registered names and DefaultFormats those written when none
// are chosen (the default of the analysis file's output.formats and of
// the plain-table mode's format list). Adding a format (plots, a report, an
// export) is one new file here: a function writing its files into the
// folder, registered with Register from the file's init.
//
// # The folder
//
// A result folder is written in three steps: New starts it in a hidden
// temporary sibling folder; Write (or WriteJSON, or the Folder's Create,
// WriteFile and Reserve) adds files; Commit syncs everything to disk and
// renames the temporary folder into place. Abort (deferred right after
// New) removes the temporary folder when the run fails or is
// interrupted, so that a failed run leaves no half-written result:
//
//	f, err := result.New(dir, force)
//	if err != nil { ... }
//	defer f.Abort()
//	files, err := result.Write(f, doc, truth, result.DefaultFormats())
//	if err != nil { ... }
//	return f.Commit()
//
// An existing folder is refused (ErrExists) unless replacing is asked
// for, and even then only an empty folder or an earlier result (a folder
// holding result.json) is replaced (ErrNotResult otherwise). A process
// killed (not interrupted) while writing can leave a hidden
// ".NAME.partial-XXXX" folder beside the result; it is safe to delete.
//
// Errors: every function returns errors; nothing panics on any input.
package result
