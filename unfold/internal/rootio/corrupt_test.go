package rootio

import (
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
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
