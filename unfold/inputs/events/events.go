package events

import (
	"context"
	"fmt"
	"path/filepath"
	"strings"
)

// Source is a readable event sample.
type Source interface {
	// Columns returns the names of the columns that Read can deliver, in
	// file order.
	Columns() []string

	// Len returns the number of events, or -1 if it is not known without
	// reading the whole file.
	Len() int64

	// Read streams the named columns in batches of at most batchSize rows,
	// in file order. b.Start is the index of the batch's first event, b.Len
	// its number of rows, and b.Cols[c] the values of columns[c], of length
	// b.Len. The batch and its slices are reused: they are valid only until
	// fn returns. Read stops at the first error returned by fn and returns
	// it unchanged; it checks ctx between batches and returns ctx.Err() when
	// the context is done. Read may be called more than once, each time
	// from the first event. It panics if batchSize < 1.
	Read(ctx context.Context, columns []string, batchSize int, fn func(b *Batch) error) error

	// ReadRange is Read restricted to the events [lo, hi) (hi < 0: to the
	// end; a range beyond the end is cut there). b.Start stays the index
	// of the event in the file. ROOT trees are read by entry range,
	// Parquet files from the row group holding lo, CSV files by scanning
	// the lines before lo.
	ReadRange(ctx context.Context, columns []string, lo, hi int64, batchSize int, fn func(b *Batch) error) error

	// Close releases the file.
	Close() error
}

// Unreadable is implemented by the sources whose files can hold columns
// that cannot be read as one number per event (ROOT arrays, strings,
// vectors; Parquet groups, lists, decimals): Unreadable returns each such
// column with the reason, so that a request for one is answered with the
// reason rather than as an unknown column.
type Unreadable interface {
	Unreadable() map[string]string
}

// Batch is a block of consecutive events, column by column.
type Batch struct {
	Start int64       // index of the first event of the batch in the file
	Len   int         // number of events in the batch
	Cols  [][]float64 // Cols[c][k]: column c of event Start+k; len(Cols[c]) == Len
}

// Options configures Open.
type Options struct {
	// Tree is the path of the TTree inside a ROOT file ("events" or
	// "dir/events"). If empty, the file must hold exactly one TTree at its
	// top level.
	Tree string

	// Workers is the number of goroutines that decode a ROOT file in
	// parallel, each on its own range of entries; batches still arrive in
	// file order and hold the same values. 0 means runtime.GOMAXPROCS(0).
	// Parquet and CSV files are decoded in the calling goroutine.
	Workers int
}

// Format is an input file format.
type Format int

// The formats Open knows.
const (
	FormatUnknown Format = iota
	FormatROOT
	FormatParquet
	FormatCSV
)

func (f Format) String() string {
	switch f {
	case FormatROOT:
		return "ROOT"
	case FormatParquet:
		return "Parquet"
	case FormatCSV:
		return "CSV"
	}
	return "unknown"
}

// FormatOf returns the format of a file from its extension: .root, .parquet
// (.parq, .pq) or .csv, in any letter case.
func FormatOf(path string) Format {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".root":
		return FormatROOT
	case ".parquet", ".parq", ".pq":
		return FormatParquet
	case ".csv":
		return FormatCSV
	}
	return FormatUnknown
}

// Open opens an event file, choosing the format by its extension.
func Open(path string, opt Options) (Source, error) {
	switch FormatOf(path) {
	case FormatROOT:
		r, err := OpenROOT(path, opt.Tree)
		if err != nil {
			return nil, err
		}
		r.SetWorkers(opt.Workers)
		return r, nil
	case FormatParquet:
		return OpenParquet(path)
	case FormatCSV:
		return OpenCSV(path)
	}
	return nil, fmt.Errorf("events: %s: unknown file type %q; use .root, .parquet or .csv", path, filepath.Ext(path))
}

// clipRange returns the range [lo, hi) of ReadRange cut to n events (a
// negative hi meaning n).
func clipRange(lo, hi, n int64) (int64, int64) {
	if hi < 0 || hi > n {
		hi = n
	}
	lo = max(lo, 0)
	if lo > hi {
		lo = hi
	}
	return lo, hi
}

// Count returns the number of events of src: its Len when known, else
// the count of a scan of the whole file (a CSV file), which also checks
// that every line has the header's number of fields.
func Count(ctx context.Context, src Source) (int64, error) {
	if n := src.Len(); n >= 0 {
		return n, nil
	}
	var n int64
	err := src.Read(ctx, nil, 1<<16, func(b *Batch) error {
		n += int64(b.Len)
		return nil
	})
	return n, err
}

// checkRequest validates a list of requested columns against the available
// ones and returns their indices.
func checkRequest(path string, have []string, want []string) ([]int, error) {
	idx := make(map[string]int, len(have))
	for i, n := range have {
		idx[n] = i
	}
	out := make([]int, len(want))
	for i, n := range want {
		j, ok := idx[n]
		if !ok {
			return nil, fmt.Errorf("events: %s: no column %q%s", path, n, listHint(have))
		}
		out[i] = j
	}
	return out, nil
}

func listHint(have []string) string {
	if len(have) == 0 {
		return " (the file has none)"
	}
	if len(have) <= 20 {
		return fmt.Sprintf(" (have: %s)", strings.Join(have, ", "))
	}
	return fmt.Sprintf(" (%d available; first: %s, ...)", len(have), strings.Join(have[:20], ", "))
}

func checkBatchSize(n int) {
	if n < 1 {
		panic(fmt.Sprintf("events: batch size %d < 1", n))
	}
}

// newBatch allocates a batch of nc columns with room for n rows each.
func newBatch(nc, n int) *Batch {
	b := &Batch{Cols: make([][]float64, nc)}
	for c := range b.Cols {
		b.Cols[c] = make([]float64, n)
	}
	return b
}
