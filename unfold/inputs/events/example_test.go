package events_test

import (
	"context"
	"fmt"
	"os"
	"path/filepath"

	"github.com/desmear/desmear/unfold/inputs/events"
	"github.com/desmear/desmear/unfold/internal/eventfile"
)

func Example() {
	dir, _ := os.MkdirTemp("", "events-example-")
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "sim.parquet")

	names := []string{"pt_true", "pt_reco", "weight"}
	cols := [][]float64{
		{10, 20, 30, 40, 50},
		{11, 19, 33, 38, 52},
		{1, 1, 0.5, 1, 2},
	}
	if err := eventfile.WriteParquet(path, names, cols); err != nil {
		fmt.Println(err)
		return
	}

	src, err := events.Open(path, events.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	defer src.Close()
	fmt.Println(src.Columns(), src.Len())
	err = src.Read(context.Background(), []string{"pt_reco", "weight"}, 2, func(b *events.Batch) error {
		fmt.Println(b.Start, b.Len, b.Cols)
		return nil
	})
	if err != nil {
		fmt.Println(err)
	}
	// Output:
	// [pt_reco pt_true weight] 5
	// 0 2 [[11 19] [1 1]]
	// 2 2 [[33 38] [0.5 1]]
	// 4 1 [[52] [2]]
}
