package events

import (
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/desmear/desmear/unfold/internal/eventfile"
)

// TestCorrupted flips random bytes of ROOT and Parquet files: opening and
// reading them must end in an error or in values, never in a panic (go-hep
// and parquet-go panic on some damaged input; the readers recover). Parquet
// pages carry CRC checksums, so every damaged Parquet file must be refused;
// ROOT baskets stored uncompressed have no checksum, so damage there can go
// unnoticed, which is the format's limit.
func TestCorrupted(t *testing.T) {
	dir := t.TempDir()
	names, cols := sampleColumns(20000)
	for _, file := range []string{"c.root", "c.parquet"} {
		p := filepath.Join(dir, file)
		if filepath.Ext(file) == ".root" {
			eventfile.WriteROOT(p, "events", names, cols)
		} else {
			eventfile.WriteParquet(p, names, cols)
		}
		data, _ := os.ReadFile(p)
		rng := rand.New(rand.NewPCG(1, 2))
		fails := 0
		for trial := range 60 {
			d := append([]byte(nil), data...)
			for range 1 + rng.IntN(20) {
				d[rng.IntN(len(d))] ^= byte(1 + rng.IntN(255))
			}
			q := filepath.Join(dir, fmt.Sprintf("x%d%s", trial, filepath.Ext(file)))
			os.WriteFile(q, d, 0o644)
			for _, w := range []int{1, 2} {
				src, err := Open(q, Options{Workers: w})
				if err == nil {
					err = src.Read(context.Background(), names, 1000, func(*Batch) error { return nil })
					src.Close()
				}
				if err != nil {
					fails++
				}
			}
			os.Remove(q)
		}
		t.Logf("%s: %d of 120 reads failed with an error", file, fails)
		if filepath.Ext(file) == ".parquet" && fails != 120 {
			t.Errorf("%d of 120 damaged Parquet reads succeeded", 120-fails)
		}
	}
}
