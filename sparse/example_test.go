package sparse_test

import (
	"bytes"
	"fmt"
	"log"

	"github.com/desmear/desmear/sparse"
)

// A 3-reco × 2-truth response filled from weighted entries; the
// duplicates of a cell are summed.
func ExampleAccumulator() {
	acc, err := sparse.NewAccumulator(3, 2, nil)
	if err != nil {
		log.Fatal(err)
	}
	// Batch 0 and batch 1 could come from two goroutines, in any order.
	if err := acc.AddBatch(1, []int32{2, 1}, []int32{1, 1}, []float64{0.5, 1}); err != nil {
		log.Fatal(err)
	}
	if err := acc.AddBatch(0, []int32{0, 0, 1}, []int32{0, 0, 0}, []float64{1, 2, -0.25}); err != nil {
		log.Fatal(err)
	}
	m, rep, err := acc.Matrix()
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println("entries", rep.Entries, "cells", rep.Cells, "negative", rep.NegativeCount)
	for i := 0; i < 3; i++ {
		fmt.Println(m.At(i, 0), m.At(i, 1))
	}
	fmt.Println("sum w² of cell (0,0):", m.SumW2()[0])
	// Output:
	// entries 5 cells 4 negative 1
	// 3 0
	// -0.25 1
	// 0 0.5
	// sum w² of cell (0,0): 5
}

func ExampleMatrix_Fold() {
	// A = [[1 2] [0 3] [4 0]] in compressed columns.
	m, err := sparse.NewMatrix(3, 2, []int{0, 2, 4}, []int{0, 2, 0, 1}, []float64{1, 4, 2, 3}, nil)
	if err != nil {
		log.Fatal(err)
	}
	dst := make([]float64, 3)
	m.Fold(dst, []float64{1, 10})
	fmt.Println(dst)
	back := make([]float64, 2)
	m.BackProject(back, []float64{1, 1, 1})
	fmt.Println(back)
	// Output:
	// [21 30 4]
	// [5 5]
}

// One fused pass: gather g = Aᵀy per column, update the column's unknown
// (here x_j ← x_j·g_j), scatter the column into next = A x'.
func ExampleMatrix_Sweep() {
	m, err := sparse.NewMatrix(3, 2, []int{0, 2, 4}, []int{0, 2, 0, 1}, []float64{1, 4, 2, 3}, nil)
	if err != nil {
		log.Fatal(err)
	}
	x := []float64{1, 2}
	y := []float64{1, 0.5, 0.25}
	next := make([]float64, 3)
	m.Sweep(next, y, func(j int, g float64) float64 {
		x[j] *= g
		return x[j]
	})
	fmt.Println(x, next)
	// Output:
	// [2 7] [16 21 8]
}

// Write a matrix in the package's checksummed file format and read it
// back.
func ExampleRead() {
	m, err := sparse.NewMatrix(2, 2, []int{0, 1, 2}, []int{0, 1}, []float64{0.75, 0.5}, []float64{0.1, 0.2})
	if err != nil {
		log.Fatal(err)
	}
	var file bytes.Buffer // a file written with WriteTo reads back with Load
	if _, err := m.WriteTo(&file); err != nil {
		log.Fatal(err)
	}
	back, err := sparse.Read(&file)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Println(back.NNZ(), back.At(0, 0), back.At(1, 1), back.SumW2(), m.EncodedSize(), "bytes")
	// Output:
	// 2 0.75 0.5 [0.1 0.2] 100 bytes
}
