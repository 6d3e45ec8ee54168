package rootio

import (
	"encoding/binary"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// TestCorrupted flips random bytes of a written histogram file: reading
// must end in an error or in values, never in a panic.
func TestCorrupted(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "h.root")
	h1 := NewHist1D("a", []float64{0, 1, 2, 3})
	if err := WriteFile(path, []*Hist1D{h1}, []*Hist2D{distinct2D("b", []float64{0, 1, 2}, []float64{0, 5, 9})}); err != nil {
		t.Fatal(err)
	}
	data, _ := os.ReadFile(path)
	rng := rand.New(rand.NewPCG(7, 8))
	fails := 0
	for trial := range 100 {
		d := append([]byte(nil), data...)
		for range 1 + rng.IntN(10) {
			d[rng.IntN(len(d))] ^= byte(1 + rng.IntN(255))
		}
		q := filepath.Join(dir, fmt.Sprintf("x%d.root", trial))
		os.WriteFile(q, d, 0o644)
		if _, err := ReadHist2D(q, "b"); err != nil {
			fails++
		}
		if _, err := ReadHist1D(q, "a"); err != nil {
			fails++
		}
		if _, err := Keys(q); err != nil {
			fails++
		}
	}
	t.Logf("%d of 300 reads failed with an error", fails)
}

// TestDeclaredLengths damages the uncompressed size declared by the
// streamer record of a written histogram file (the key header's
// fObjlen, common practice of the ROOT file format): reading is refused
// naming the file, without allocating the declared 2 GB (go-hep v0.36.0
// allocates it before reading).
func TestDeclaredLengths(t *testing.T) {
	data, err := os.ReadFile("testdata/hists.root")
	if err != nil {
		t.Fatal(err)
	}
	if v := binary.BigEndian.Uint32(data[4:]); v >= 1000000 {
		t.Fatalf("the seed file is a large-file layout (version %d); the offsets below are for small files", v)
	}
	seekinfo := binary.BigEndian.Uint32(data[37:])
	d := append([]byte(nil), data...)
	binary.BigEndian.PutUint32(d[seekinfo+6:], 0x7ffffff0)
	q := filepath.Join(t.TempDir(), "x.root")
	os.WriteFile(q, d, 0o644)
	var m0, m1 runtime.MemStats
	runtime.ReadMemStats(&m0)
	_, err = ReadHist1D(q, "h1")
	runtime.ReadMemStats(&m1)
	if err == nil || !strings.Contains(err.Error(), q+": damaged ROOT file: the streamer record at byte") {
		t.Errorf("damaged streamer size: %v", err)
	}
	if a := m1.TotalAlloc - m0.TotalAlloc; a > 16<<20 {
		t.Errorf("%d bytes allocated to refuse it", a)
	}
}
