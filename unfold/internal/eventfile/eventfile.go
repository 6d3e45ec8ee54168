// Package eventfile writes event samples (columns of float64 values) as
// the CSV, Parquet and ROOT files that package events reads, for the
// demo and for tests. Every file is written atomically (a temporary
// file beside the target, synced, renamed into place); an existing file
// at the path is replaced.
package eventfile

import (
	"bufio"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/parquet-go/parquet-go"
	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/rtree"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// checkColumns validates the arguments of the writers.
func checkColumns(path string, names []string, cols [][]float64) error {
	if len(names) != len(cols) {
		return fmt.Errorf("events: writing %s: %d names for %d columns", path, len(names), len(cols))
	}
	if len(names) == 0 {
		return fmt.Errorf("events: writing %s: no columns", path)
	}
	seen := map[string]bool{}
	for i, n := range names {
		if n == "" {
			return fmt.Errorf("events: writing %s: column %d has an empty name", path, i)
		}
		if seen[n] {
			return fmt.Errorf("events: writing %s: column name %q given twice", path, n)
		}
		seen[n] = true
		if len(cols[i]) != len(cols[0]) {
			return fmt.Errorf("events: writing %s: column %q has %d values, column %q has %d",
				path, n, len(cols[i]), names[0], len(cols[0]))
		}
	}
	return nil
}

// write writes path atomically through fn and puts the path into the
// errors of the writing.
func write(path string, fn func(io.Writer) error) error {
	if err := atomicfile.Write(path, fn); err != nil {
		return fmt.Errorf("events: writing %s: %w", path, err)
	}
	return nil
}

// WriteCSV writes the columns to a CSV file with a header line, each value
// in the shortest form that reads back to the same float64.
func WriteCSV(path string, names []string, cols [][]float64) error {
	if err := checkColumns(path, names, cols); err != nil {
		return err
	}
	for _, n := range names {
		if strings.ContainsAny(n, ",\"\r\n") || strings.TrimSpace(n) != n || strings.HasPrefix(n, "#") {
			return fmt.Errorf("events: writing %s: column name %q cannot be written to a CSV header", path, n)
		}
	}
	return write(path, func(f io.Writer) error {
		w := bufio.NewWriterSize(f, 1<<20)
		w.WriteString(strings.Join(names, ","))
		w.WriteByte('\n')
		buf := make([]byte, 0, 32*len(cols))
		for k := range cols[0] {
			buf = buf[:0]
			for i := range cols {
				if i > 0 {
					buf = append(buf, ',')
				}
				buf = strconv.AppendFloat(buf, cols[i][k], 'g', -1, 64)
			}
			buf = append(buf, '\n')
			w.Write(buf)
		}
		return w.Flush()
	})
}

// RowGroupRows is the number of rows per row group written by WriteParquet.
const RowGroupRows = 1 << 20

// WriteParquet writes the columns as required DOUBLE columns of a new
// Parquet file, Snappy-compressed, in row groups of RowGroupRows rows.
func WriteParquet(path string, names []string, cols [][]float64) error {
	if err := checkColumns(path, names, cols); err != nil {
		return err
	}
	group := parquet.Group{}
	for _, n := range names {
		group[n] = parquet.Leaf(parquet.DoubleType)
	}
	schema := parquet.NewSchema("events", group)
	// Map schema leaf order (sorted by name) to our columns.
	order := make([]int, len(names))
	byName := map[string]int{}
	for i, n := range names {
		byName[n] = i
	}
	for j, col := range schema.Columns() {
		order[j] = byName[col[0]]
	}
	return write(path, func(f io.Writer) error {
		w := parquet.NewWriter(f, schema, parquet.Compression(&parquet.Snappy))
		buf := parquet.NewBuffer(schema)
		n := len(cols[0])
		for lo := 0; lo < n; lo += RowGroupRows {
			hi := min(lo+RowGroupRows, n)
			buf.Reset()
			for j, cb := range buf.ColumnBuffers() {
				dw, ok := cb.(parquet.DoubleWriter)
				if !ok {
					return fmt.Errorf("column buffer %T cannot take doubles", cb)
				}
				if _, err := dw.WriteDoubles(cols[order[j]][lo:hi]); err != nil {
					return err
				}
			}
			if _, err := w.WriteRowGroup(buf); err != nil {
				return err
			}
		}
		return w.Close()
	})
}

// WriteROOT writes the columns as float64 branches of a TTree named tree in
// a new ROOT file (LZ4-compressed baskets).
func WriteROOT(path, tree string, names []string, cols [][]float64) error {
	if err := checkColumns(path, names, cols); err != nil {
		return err
	}
	if tree == "" || strings.ContainsAny(tree, "/;") {
		return fmt.Errorf("events: writing %s: bad tree name %q", path, tree)
	}
	err := atomicfile.WriteVia(path, func(tmp string) error {
		f, err := groot.Create(tmp)
		if err != nil {
			return err
		}
		vals := make([]float64, len(cols))
		wvars := make([]rtree.WriteVar, len(cols))
		for i, n := range names {
			wvars[i] = rtree.WriteVar{Name: n, Value: &vals[i]}
		}
		w, err := rtree.NewWriter(f, tree, wvars, rtree.WithLZ4(1))
		if err != nil {
			f.Close()
			return fmt.Errorf("tree %q: %w", tree, err)
		}
		for k := range cols[0] {
			for i := range cols {
				vals[i] = cols[i][k]
			}
			if _, err := w.Write(); err != nil {
				w.Close()
				f.Close()
				return fmt.Errorf("entry %d: %w", k, err)
			}
		}
		if err := w.Close(); err != nil {
			f.Close()
			return err
		}
		return f.Close()
	})
	if err != nil {
		return fmt.Errorf("events: writing %s: %w", path, err)
	}
	return nil
}
