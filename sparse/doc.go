// Package sparse holds response matrices in compressed-column form and
// the kernels that iterative unfolding needs.
//
// # Storage
//
// A Matrix is a rows×cols matrix (rows are reco bins, columns are truth
// bins) stored once, as a github.com/james-bowman/sparse CSC whose arrays
// this package builds itself: exactly deduplicated, with strictly
// increasing row indices in every column. Beside each value it may hold
// the sum of squared weights that produced it. This package never relies
// on james-bowman's own construction or products: its COO to CSC
// conversion leaves duplicates of the first entry of a column unmerged,
// its MulVecTo adds into the destination instead of overwriting it, and
// gonum's VecDense.MulVec falls back to At per element when given one of
// its matrices. The kernels of this package work on the raw arrays.
//
// # Accumulation
//
// An Accumulator sums weighted (row, column) entries from many goroutines
// into distinct cells, in memory that grows with the number of distinct
// cells, and returns the Matrix. Its result depends only on the ordered
// stream of entries (batches concatenated in sequence order), never on
// the number of goroutines or their scheduling. Its memory budget,
// AccumulatorBytes, is 54 bytes per distinct cell plus fixed buffers,
// whatever the number of entries; with AccumulatorOptions.MemoryLimit
// an accumulation that outgrows the limit stops with a *MemoryError.
// Sum merges matrices
// cell by cell in argument order, so that partial matrices (of event
// shards) merged in a fixed order give the same bits however they were
// grouped.
//
// # Kernels
//
// Fold (dst = A x), BackProject (dst = Aᵀ y), the fused Sweep (one pass
// that gathers Aᵀ y column by column, lets the caller update the column's
// unknown and scatters the column into the next fold), SweepRows (Sweep
// that also hands each fixed range of rows to the caller once final),
// SweepHooks (SweepRows that also hands each column block over once
// updated),
// ColSums, RowSums and ScaleCols write into caller-owned slices and do not
// allocate after warm-up. Large matrices are processed in parallel over a fixed
// partition of the columns decided from the matrix structure alone; the
// partial sums are reduced in a fixed order, so every kernel returns the
// same bits whatever GOMAXPROCS is.
//
// SweepBlock with 8 vectors runs its gathers and scatters in 256-bit AVX
// assembly on amd64 (sweep8_amd64.s) where the processor and the
// operating system support AVX: every vector is one lane, with the
// multiplies and adds of the Go loop in the same order (no fused
// multiply-add), so the bits are those of the Go loop, which is kept as
// the reference and the fallback (other architectures, no AVX, or the
// build tag purego), as gonum keeps Go fallbacks of its assembly kernels.
//
// Partitions of banded matrices (the usual response: migrations stay near
// the diagonal in every axis) scatter in two phases straight into the
// destination; other matrices use per-block buffers and a reduction pass.
// Every Matrix method may be called from many goroutines at once, except
// ScaleCols, which changes the matrix.
//
// # Files
//
// WriteTo writes a matrix (values, squared-weight sums, dimensions) in a
// compact checksummed binary format of this package (writing it to a file
// atomically is the caller's part, as the response bundle does); Load and
// Read return an error wrapping ErrFormat for a truncated or corrupted
// file. The layout is documented in format.go.
//
// # Test matrices
//
// Package sparsetest builds synthetic responses with the structure of a
// fine three-dimensional analysis, used by the tests and benchmarks of
// this and other packages.
//
// # Conventions
//
// Destination arguments come first. Dimension mismatches and aliasing
// violations are programmer errors and panic. Problems with data (an
// index out of range in an accumulated entry, a corrupted file, a matrix
// too large to make dense) are returned as errors that say what and
// where.
package sparse
