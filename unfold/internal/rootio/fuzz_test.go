package rootio

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// FuzzReadHist reads arbitrary bytes as a ROOT file holding the 1-D
// histogram "h1" and the 2-D histogram "h2" (seed: testdata/hists.root,
// written by WriteFile): cells or an error naming the file, never a
// panic, and as many cells as the axes say.
func FuzzReadHist(f *testing.F) {
	b, err := os.ReadFile("testdata/hists.root")
	if err != nil {
		f.Fatal(err)
	}
	f.Add(b)
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, data []byte) {
		path := filepath.Join(dir, "f.root")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		if h, err := ReadHist1D(path, "h1"); err != nil {
			if !strings.Contains(err.Error(), path) {
				t.Fatalf("ReadHist1D error does not name the file: %v", err)
			}
		} else if len(h.SumW) != len(h.Edges)+1 || len(h.SumW2) != len(h.SumW) {
			t.Fatalf("%d cells for %d edges", len(h.SumW), len(h.Edges))
		}
		if h, err := ReadHist2D(path, "h2"); err != nil {
			if !strings.Contains(err.Error(), path) {
				t.Fatalf("ReadHist2D error does not name the file: %v", err)
			}
		} else if len(h.SumW) != (len(h.XEdges)+1)*(len(h.YEdges)+1) {
			t.Fatalf("%d cells for %d×%d edges", len(h.SumW), len(h.XEdges), len(h.YEdges))
		}
	})
}
