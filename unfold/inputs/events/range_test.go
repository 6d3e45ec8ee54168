package events

import (
	"context"
	"math"
	"os"
	"path/filepath"
	"testing"

	"github.com/parquet-go/parquet-go"

	"github.com/desmear/desmear/unfold/internal/eventfile"
)

// TestReadRange checks ReadRange of every format against the same slice
// of a whole Read (the range [lo, hi) of the events, common practice for
// a ranged read), for ranges at the start, in the middle, across ROOT
// decoding chunks, at the end, beyond the end and empty; b.Start stays
// the position in the file. Count gives the number of events of each.
func TestReadRange(t *testing.T) {
	defer func(c int64) { rootChunk = c }(rootChunk)
	rootChunk = 777
	dir := t.TempDir()
	const n = 5000
	names, cols := sampleColumns(n)
	files := map[string]func(string) error{
		"e.csv":     func(p string) error { return eventfile.WriteCSV(p, names, cols) },
		"e.parquet": func(p string) error { return eventfile.WriteParquet(p, names, cols) },
		"e.root":    func(p string) error { return eventfile.WriteROOT(p, "events", names, cols) },
	}
	order := []string{"weight", "pt_true"}
	want := [][]float64{cols[3], cols[0]}
	ranges := [][2]int64{{0, 1}, {0, n}, {0, -1}, {13, 2000}, {777, 1554}, {1000, 1001}, {4321, n}, {4321, n + 50}, {n, n + 3}, {2500, 2500}, {n + 10, -1}}
	for name, write := range files {
		path := filepath.Join(dir, name)
		if err := write(path); err != nil {
			t.Fatal(err)
		}
		for _, workers := range []int{1, 3} {
			src, err := Open(path, Options{Workers: workers})
			if err != nil {
				t.Fatal(err)
			}
			if got, err := Count(context.Background(), src); err != nil || got != n {
				t.Errorf("%s: Count %d, %v; want %d", name, got, err, n)
			}
			for _, r := range ranges {
				lo, hi := r[0], r[1]
				wlo, whi := min(lo, n), hi
				if whi < 0 || whi > n {
					whi = n
				}
				for _, bs := range []int{64, 1000} {
					got := make([][]float64, len(order))
					next := wlo
					err := src.ReadRange(context.Background(), order, lo, hi, bs, func(b *Batch) error {
						if b.Start != next || b.Len > bs {
							t.Fatalf("%s [%d,%d): batch at %d of %d, want at %d", name, lo, hi, b.Start, b.Len, next)
						}
						for c := range order {
							got[c] = append(got[c], b.Cols[c]...)
						}
						next += int64(b.Len)
						return nil
					})
					if err != nil {
						t.Fatalf("%s [%d,%d): %v", name, lo, hi, err)
					}
					for c := range order {
						if i, ok := sameBits(got[c], want[c][wlo:whi]); !ok {
							t.Fatalf("%s workers %d [%d,%d) batch %d: column %s differs at %d (%d values, want %d)", name, workers, lo, hi, bs, order[c], i, len(got[c]), whi-wlo)
						}
					}
				}
			}
			src.Close()
		}
	}
}

// TestParquetReadRangeRowGroups: ranged reads of a Parquet file of many
// small row groups (and pages) equal the slices of a whole read, for
// ranges that start and end inside, at the edges of, and across groups.
func TestParquetReadRangeRowGroups(t *testing.T) {
	type row struct {
		X float64 `parquet:"x"`
		N int64   `parquet:"n"`
	}
	rows := make([]row, 5000)
	for k := range rows {
		rows[k] = row{X: math.Sqrt(float64(k)), N: int64(k) - 7}
	}
	path := filepath.Join(t.TempDir(), "groups.parquet")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w := parquet.NewGenericWriter[row](f, parquet.MaxRowsPerRowGroup(700), parquet.PageBufferSize(1024))
	if _, err := w.Write(rows); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	src, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer src.Close()
	if g := len(src.(*Parquet).pf.RowGroups()); g < 7 {
		t.Fatalf("%d row groups, want at least 7", g)
	}
	for _, r := range [][2]int64{{0, 700}, {700, 1400}, {699, 701}, {1, 4999}, {2100, 2100}, {3333, 5000}, {4999, 6000}} {
		var xs, ns []float64
		err := src.ReadRange(context.Background(), []string{"x", "n"}, r[0], r[1], 128, func(b *Batch) error {
			xs = append(xs, b.Cols[0]...)
			ns = append(ns, b.Cols[1]...)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		hi := min(r[1], 5000)
		if int64(len(xs)) != hi-r[0] {
			t.Fatalf("[%d,%d): %d rows", r[0], r[1], len(xs))
		}
		for i := range xs {
			k := r[0] + int64(i)
			if xs[i] != rows[k].X || ns[i] != float64(rows[k].N) {
				t.Fatalf("[%d,%d): row %d is %v %v, want %v %v", r[0], r[1], k, xs[i], ns[i], rows[k].X, rows[k].N)
			}
		}
	}
}
