package tables

import (
	"bytes"
	"math/rand/v2"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// benchResponse returns a response table of cols truth bins with nnz
// entries each (a band around the diagonal), as CSV.
func benchResponse(b *testing.B, cols, nnz int) []byte {
	rng := rand.New(rand.NewPCG(1, 1))
	colPtr := make([]int, cols+1)
	var rowIdx []int
	var val []float64
	rows := 2 * cols
	for j := 0; j < cols; j++ {
		lo := max(0, min(2*j-nnz/2, rows-nnz))
		for k := 0; k < nnz; k++ {
			rowIdx = append(rowIdx, lo+k)
			val = append(val, 1+rng.Float64()*1000)
		}
		colPtr[j+1] = len(val)
	}
	m, err := sparse.NewMatrix(rows, cols, colPtr, rowIdx, val, nil)
	if err != nil {
		b.Fatal(err)
	}
	var buf bytes.Buffer
	if err := WriteResponse(&buf, m); err != nil {
		b.Fatal(err)
	}
	return buf.Bytes()
}

// BenchmarkReadResponse reads and assembles a response table of 1,000,000
// entries (50,000 truth × 100,000 reco bins, 20 per column).
func BenchmarkReadResponse(b *testing.B) {
	data := benchResponse(b, 50_000, 20)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		r, err := ReadResponse(bytes.NewReader(data), "A.csv")
		if err != nil {
			b.Fatal(err)
		}
		nr, nt := r.Dims()
		if _, err := r.Matrix(Sizes{Reco: nr, Truth: nt}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkWriteResponse writes the same table.
func BenchmarkWriteResponse(b *testing.B) {
	data := benchResponse(b, 50_000, 20)
	r, _ := ReadResponse(bytes.NewReader(data), "A.csv")
	nr, nt := r.Dims()
	m, _ := r.Matrix(Sizes{Reco: nr, Truth: nt})
	b.SetBytes(int64(len(data)))
	var buf bytes.Buffer
	for b.Loop() {
		buf.Reset()
		if err := WriteResponse(&buf, m); err != nil {
			b.Fatal(err)
		}
	}
}
