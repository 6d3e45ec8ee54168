package rootio

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"go-hep.org/x/hep/groot/riofs"
)

// TestStoredName checks that a written file records its final base name
// as its own name, in its first record (read back by go-hep as the
// file's name, the name of its TFile key) and in every directory record,
// and nowhere the temporary name it was written under (ROOT stores the
// creation name in the TFile key and in each TDirectory record, common
// practice of the ROOT file format).
func TestStoredName(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "result.root")
	h1 := NewHist1D("central/counts", []float64{0, 1, 2})
	h2 := NewHist2D("forward/sub/map", []float64{0, 1}, []float64{0, 1, 3})
	if err := WriteFile(path, []*Hist1D{h1}, []*Hist2D{h2}); err != nil {
		t.Fatal(err)
	}
	f, err := riofs.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	if got := f.Name(); got != "result.root" {
		t.Errorf("stored file name %q; want result.root", got)
	}
	f.Close()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if bytes.Contains(raw, []byte(".tmp-")) || bytes.Contains(raw, []byte(dir)) {
		t.Errorf("the file records its temporary name or its folder")
	}
	if n := bytes.Count(raw, []byte("result.root")); n < 3 {
		// The TFile key, its TNamed and the records of the directories
		// central, forward and forward/sub.
		t.Errorf("the name is recorded %d times; want at least 3", n)
	}
	// The histograms read back as ever.
	if _, err := ReadHist2D(path, "forward/sub/map"); err != nil {
		t.Fatal(err)
	}
}
