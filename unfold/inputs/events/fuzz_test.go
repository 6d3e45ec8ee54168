package events

import (
	"bytes"
	"context"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzCSV reads arbitrary bytes as a CSV file: opening and reading must
// return values or an error naming the file, never panic.
func FuzzCSV(f *testing.F) {
	for _, s := range []string{
		"a,b\n1,2\n", "a,b\r\n1,2", "a\n\"1\"\n", "a,b\n1,\"2\n3\"\n", "#x\na\n1\n\n2\n",
		"a,a\n1,1\n", "\ufeffa\n1e400\n", "a,b\n1\n", "a\n\"\n", "a\nNaN\n-Inf\ntrue\n",
	} {
		f.Add([]byte(s))
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte) {
		path := filepath.Join(dir, "f.csv")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		src, err := OpenCSV(path)
		if err != nil {
			if !strings.Contains(err.Error(), path) {
				t.Fatalf("OpenCSV error does not name the file: %v", err)
			}
			return
		}
		n := 0
		err = src.Read(context.Background(), src.Columns(), 3, func(b *Batch) error {
			n += b.Len
			for _, c := range b.Cols {
				if len(c) != b.Len {
					t.Fatalf("column of %d values in a batch of %d", len(c), b.Len)
				}
			}
			return nil
		})
		if err != nil && !strings.Contains(err.Error(), path) {
			t.Fatalf("Read error does not name the file: %v", err)
		}
	})
}

// fuzzFile checks one fuzzed event file: opened with open, every column
// read in small batches; values or an error naming the file, never a
// panic, and batches of consistent sizes.
func fuzzFile(t *testing.T, path string, open func(string) (Source, error)) {
	src, err := open(path)
	if err != nil {
		if !strings.Contains(err.Error(), path) {
			t.Fatalf("open error does not name the file: %v", err)
		}
		return
	}
	defer src.Close()
	err = src.Read(context.Background(), src.Columns(), 2, func(b *Batch) error {
		for _, c := range b.Cols {
			if len(c) != b.Len {
				t.Fatalf("column of %d values in a batch of %d", len(c), b.Len)
			}
		}
		return nil
	})
	if err != nil && !strings.Contains(err.Error(), path) {
		t.Fatalf("Read error does not name the file: %v", err)
	}
}

// seed adds the content of the file at path to the corpus.
func seed(f *testing.F, path string) {
	b, err := os.ReadFile(path)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(b)
}

// FuzzROOT reads arbitrary bytes as a ROOT file with the tree "events"
// (seed: testdata/events.root, written by the package's own writer), from
// memory through the reader behind OpenROOT: values or an error naming
// the file, never a panic.
func FuzzROOT(f *testing.F) {
	seed(f, "testdata/events.root")
	f.Fuzz(func(t *testing.T, data []byte) {
		fuzzFile(t, "f.root", func(p string) (Source, error) {
			return newROOT(p, memFile{bytes.NewReader(data)}, int64(len(data)), "events")
		})
	})
}

// memFile is a ROOT file in memory.
type memFile struct{ *bytes.Reader }

func (memFile) Close() error { return nil }

// FuzzParquet reads arbitrary bytes as a Parquet file (seed:
// testdata/events.parquet), from memory through the reader behind
// OpenParquet: values or an error naming the file, never a panic.
func FuzzParquet(f *testing.F) {
	seed(f, "testdata/events.parquet")
	f.Fuzz(func(t *testing.T, data []byte) {
		fuzzFile(t, "f.parquet", func(p string) (Source, error) {
			return newParquet(p, bytes.NewReader(data), int64(len(data)))
		})
	})
}
