// Package rootio reads and writes one- and two-dimensional histograms (TH1D,
// TH2D) in ROOT files through their raw bin arrays.
//
// [Hist1D] and [Hist2D] keep ROOT's own cell layout, flow cells included:
// for a 1-D histogram with n bins, cell 0 is the underflow, cells 1..n the
// bins and cell n+1 the overflow; for a 2-D histogram with nx×ny bins, cell
// (ix, iy), 0 <= ix <= nx+1 and 0 <= iy <= ny+1, is at the global index
// ix + (nx+2)*iy, so row iy = 0 holds the y underflow and column ix = 0 the x
// underflow.
//
// The cells are copied to and from the arrays of go-hep's rhist types
// directly. The package deliberately does not go through hbook.H2D: in
// go-hep v0.36.0 the conversion between hbook.H2D and rhist.H2D places the
// eight under/overflow regions in the wrong ROOT cells (and collapses each
// flow row to one value), so a TH2D written or read that way loses its flows.
//
// Reading accepts TH1D, TH1F and TH1I (any rhist.H1 with bin accessors) and
// TH2D, TH2F and TH2I; values are converted to float64. A histogram stored
// without per-bin sums of squared weights (no Sumw2) reads with SumW2 equal
// to |SumW|, the Poisson variance of unweighted counts, and Hist.HasSumW2
// false.
//
// Writing sets ROOT's statistics members as TH1::ResetStats would recompute
// them from the bins (common practice in ROOT): fTsumw, fTsumw2 and the
// first and second moments from in-range bins at the bin centres, fEntries
// from the Entries field. Output files are written to a temporary file and
// renamed into place; each records its final base name as its own name
// (go-hep v0.36.0 records the path a file is created at, here the
// temporary one, and offers no option to change it: see withName).
//
// # Errors and panics
//
// Missing files or keys, objects of another class, damaged files and
// inconsistent histograms given to WriteFile are errors. Nothing panics on
// user input.
//
// # Checking a file before go-hep reads it
//
// [CheckFile] checks the layout of a ROOT file (the records the header
// points to, every record's size against the file and its compressed
// blocks, every key of the key list against its record) and the checksums
// of compressed baskets, which go-hep v0.36.0 does not verify; go-hep
// allocates every length a file declares before reading it, so a damaged
// length would otherwise cost up to 2 GB. It also walks the objects of
// the records go-hep decodes when it opens a file and reads a tree or a
// histogram (the streamer information, trees with their branches and
// leaves, histograms with their axes), decompressed with their size
// bounded, as go-hep reads them, and checks every object count, string
// length and array length against the bytes that remain: go-hep allocates
// those first too, up to 32 GB for one count, which ends the process. The
// baskets a branch points to must be records of the file with headers
// that fit, since go-hep reads them in goroutines of its own. The walk
// stops silently at a layout it does not know (other classes, versions,
// records above 256 MB uncompressed, the old ROOT compression). The
// histogram readers call it, and so does the event reader of
// unfold/inputs/events for trees.
package rootio
