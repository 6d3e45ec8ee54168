package events

import (
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"sync"
	"testing"
)

func osMkdirTemp() (string, error) { return os.MkdirTemp("", "desmear-events-bench-") }

func TestMain(m *testing.M) {
	code := m.Run()
	if benchFiles.dir != "" {
		os.RemoveAll(benchFiles.dir)
	}
	os.Exit(code)
}

// hepDir locates the go-hep module, whose test files were written by ROOT
// itself; the test is skipped when the module is not in the module cache.
func hepDir(t *testing.T) string {
	t.Helper()
	hepOnce.Do(func() {
		out, err := exec.Command("go", "list", "-m", "-f", "{{.Dir}}", "go-hep.org/x/hep").Output()
		hepPath, hepErr = strings.TrimSpace(string(out)), err
		if err == nil && hepPath != "" {
			_, hepErr = os.Stat(hepPath)
		}
	})
	if hepErr != nil || hepPath == "" {
		t.Skipf("go-hep module not found in the module cache (run go mod download): %v", hepErr)
	}
	dir := hepPath
	return dir
}

var (
	hepOnce sync.Once
	hepPath string
	hepErr  error
)

// readAll reads the named columns of a source, checking the batch contract
// on the way: Start increases by the previous Len, Len <= batchSize, every
// column has Len values.
func readAll(t *testing.T, src Source, cols []string, batchSize int) [][]float64 {
	t.Helper()
	out := make([][]float64, len(cols))
	var next int64
	err := src.Read(context.Background(), cols, batchSize, func(b *Batch) error {
		if b.Start != next {
			t.Fatalf("batch starts at %d, want %d", b.Start, next)
		}
		if b.Len < 1 || b.Len > batchSize {
			t.Fatalf("batch of %d rows, batch size %d", b.Len, batchSize)
		}
		if len(b.Cols) != len(cols) {
			t.Fatalf("%d columns in batch, want %d", len(b.Cols), len(cols))
		}
		for c := range b.Cols {
			if len(b.Cols[c]) != b.Len {
				t.Fatalf("column %d has %d values in a batch of %d", c, len(b.Cols[c]), b.Len)
			}
			out[c] = append(out[c], b.Cols[c]...)
		}
		next += int64(b.Len)
		return nil
	})
	if err != nil {
		t.Fatalf("Read: %v", err)
	}
	return out
}

// sameBits reports whether a and b hold the same float64 bit patterns,
// treating all NaNs as equal.
func sameBits(a, b []float64) (int, bool) {
	if len(a) != len(b) {
		return -1, false
	}
	for i := range a {
		if math.IsNaN(a[i]) && math.IsNaN(b[i]) {
			continue
		}
		if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
			return i, false
		}
	}
	return 0, true
}

func tempFiles(t *testing.T, dir string) []string {
	t.Helper()
	m, _ := filepath.Glob(filepath.Join(dir, ".*tmp-*"))
	return m
}
