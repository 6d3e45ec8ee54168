package events

import (
	"context"
	"path/filepath"
	"testing"

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
