package main

import (
	"context"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/inputs/tables"
)

// writeBenchTables writes a plain-table problem of nt truth × 2 nt reco
// bins with 20 entries per truth bin (a band), efficiency 0.8, and data
// drawn around the folded generated spectrum.
func writeBenchTables(b *testing.B, dir string, nt int) {
	const nnz = 20
	rng := rand.New(rand.NewPCG(1, 2))
	nr := 2 * nt
	colPtr := make([]int, nt+1)
	rowIdx := make([]int, 0, nt*nnz)
	val := make([]float64, 0, nt*nnz)
	gen := make([]float64, nt)
	folded := make([]float64, nr)
	for j := 0; j < nt; j++ {
		lo := max(0, min(2*j-nnz/2, nr-nnz))
		var s float64
		for k := 0; k < nnz; k++ {
			v := 1 + 100*rng.Float64()
			rowIdx = append(rowIdx, lo+k)
			val = append(val, v)
			folded[lo+k] += v
			s += v
		}
		gen[j] = s / 0.8
		colPtr[j+1] = len(val)
	}
	m, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		b.Fatal(err)
	}
	data := make([]float64, nr)
	for i, f := range folded {
		data[i] = float64(int(f * (0.9 + 0.2*rng.Float64())))
	}
	write := func(name string, fn func(w io.Writer) error) {
		f, err := os.Create(filepath.Join(dir, name))
		if err != nil {
			b.Fatal(err)
		}
		if err := fn(f); err != nil {
			b.Fatal(err)
		}
		if err := f.Close(); err != nil {
			b.Fatal(err)
		}
	}
	write("A.csv", func(w io.Writer) error { return tables.WriteResponse(w, m) })
	write("G.csv", func(w io.Writer) error { return tables.WriteVector(w, tables.Generated, gen, nil) })
	write("n.csv", func(w io.Writer) error { return tables.WriteVector(w, tables.Data, data, nil) })
}

// BenchmarkUnfoldPlainTables runs the whole plain-table command on
// 50,000 truth × 100,000 reco bins with 1,000,000 response entries:
// reading and checking the tables, 10 iterations, per-bin uncertainties
// from 100 probes through the linearised iteration, writing the folder.
func BenchmarkUnfoldPlainTables(b *testing.B) {
	for _, c := range []struct {
		name string
		args []string
	}{
		{"none", []string{"--covariance", "none", "--iterations", "10"}},
		{"probes", []string{"--covariance", "diag", "--diagonal-method", "probes", "--iterations", "4"}},
	} {
		b.Run(c.name, func(b *testing.B) {
			dir := b.TempDir()
			writeBenchTables(b, dir, 50_000)
			out := filepath.Join(dir, "result")
			args := append([]string{"unfold", "--response", filepath.Join(dir, "A.csv"), "--generated", filepath.Join(dir, "G.csv"),
				"--data", filepath.Join(dir, "n.csv"), "--out", out, "--force", "-q"}, c.args...)
			for b.Loop() {
				var stderr strings.Builder
				if code := run(context.Background(), args, strings.NewReader(""), io.Discard, &stderr); code != exitOK {
					b.Fatalf("exit %d: %s", code, stderr.String())
				}
			}
		})
	}
}
