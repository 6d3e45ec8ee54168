package events

import (
	"context"
	"path/filepath"
	"testing"
)

func TestSmokeRoundTrip(t *testing.T) {
	dir := t.TempDir()
	names := []string{"a", "b"}
	cols := [][]float64{{1, 2, 3, 4, 5}, {0.5, -1, 1e300, 7, 8}}
	for _, ext := range []string{".root", ".parquet", ".csv"} {
		p := filepath.Join(dir, "x"+ext)
		var err error
		switch ext {
		case ".root":
			err = WriteROOT(p, "events", names, cols)
		case ".parquet":
			err = WriteParquet(p, names, cols)
		case ".csv":
			err = WriteCSV(p, names, cols)
		}
		if err != nil {
			t.Fatal(err)
		}
		src, err := Open(p, Options{})
		if err != nil {
			t.Fatal(err)
		}
		var got [][]float64 = make([][]float64, 2)
		err = src.Read(context.Background(), []string{"b", "a"}, 2, func(b *Batch) error {
			got[0] = append(got[0], b.Cols[0]...)
			got[1] = append(got[1], b.Cols[1]...)
			return nil
		})
		if err != nil {
			t.Fatal(err)
		}
		t.Log(ext, src.Columns(), src.Len(), got)
		src.Close()
	}
}
