package demo

import (
	"context"
	"fmt"

	"github.com/parquet-go/parquet-go"
	"github.com/parquet-go/parquet-go/compress/snappy"
	"go-hep.org/x/hep/groot"
	"go-hep.org/x/hep/groot/rtree"

	"github.com/desmear/desmear/unfold/internal/atomicfile"
)

// TreeName is the name of the TTree in the demo's ROOT files.
const TreeName = "events"

// The demo's event files are written with go-hep's groot and with
// parquet-go directly (not through desmear's own readers' package), so
// that reading them back exercises desmear's readers against files of an
// independent writer. In the ROOT files the kinematic branches are
// float32 (Float_t, as in many analysis ntuples), the weight float64 and
// the flags bool (Bool_t). The Parquet files hold the same values as
// DOUBLE and BOOLEAN columns.

// simRow is one row of simulation.parquet.
type simRow struct {
	PtTrue    float64 `parquet:"pt_true"`
	YTrue     float64 `parquet:"y_true"`
	PtReco    float64 `parquet:"pt_reco"`
	YReco     float64 `parquet:"y_reco"`
	Weight    float64 `parquet:"weight"`
	PassTruth bool    `parquet:"pass_truth"`
	PassReco  bool    `parquet:"pass_reco"`
}

// dataRow is one row of data.parquet.
type dataRow struct {
	Pt float64 `parquet:"pt"`
	Y  float64 `parquet:"y"`
}

// ctxEvery is how often the writers look at the context.
const ctxEvery = 1 << 16

// writeTree writes a TTree of n entries with the branches vars: set(i)
// puts entry i into the variables the branches point at.
func writeTree(ctx context.Context, dst *atomicfile.Folder, name, title string, vars []rtree.WriteVar, n int, set func(i int)) error {
	// groot creates the file itself; Commit syncs it to disk.
	path, err := dst.Reserve(name)
	if err != nil {
		return err
	}
	f, err := groot.Create(path)
	if err != nil {
		return err
	}
	w, err := rtree.NewWriter(f, TreeName, vars, rtree.WithZlib(1), rtree.WithTitle(title))
	if err != nil {
		f.Close()
		return err
	}
	for i := range n {
		if i%ctxEvery == 0 {
			if err := ctx.Err(); err != nil {
				w.Close()
				f.Close()
				return err
			}
		}
		set(i)
		if _, err := w.Write(); err != nil {
			w.Close()
			f.Close()
			return fmt.Errorf("writing %s: event %d: %w", name, i, err)
		}
	}
	if err := w.Close(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// writeSimulationROOT writes the simulation as a TTree.
func writeSimulationROOT(ctx context.Context, f *atomicfile.Folder, name string, s *sample) error {
	var (
		ptTrue, yTrue, ptReco, yReco float32
		weight                       float64
		passTruth, passReco          bool
	)
	vars := []rtree.WriteVar{
		{Name: "pt_true", Value: &ptTrue},
		{Name: "y_true", Value: &yTrue},
		{Name: "pt_reco", Value: &ptReco},
		{Name: "y_reco", Value: &yReco},
		{Name: "weight", Value: &weight},
		{Name: "pass_truth", Value: &passTruth},
		{Name: "pass_reco", Value: &passReco},
	}
	return writeTree(ctx, f, name, "demo run: simulated zetons and fakes", vars, s.len(), func(i int) {
		ptTrue, yTrue = float32(s.ptTrue[i]), float32(s.yTrue[i])
		ptReco, yReco = float32(s.ptReco[i]), float32(s.yReco[i])
		weight = s.weight[i]
		passTruth, passReco = s.passTruth[i], s.passReco[i]
	})
}

// writeDataROOT writes the pseudo-data (reco-level pt and y) as a TTree.
func writeDataROOT(ctx context.Context, f *atomicfile.Folder, name string, s *sample) error {
	var pt, y float32
	vars := []rtree.WriteVar{{Name: "pt", Value: &pt}, {Name: "y", Value: &y}}
	return writeTree(ctx, f, name, "demo run: pseudo-data", vars, s.len(), func(i int) {
		pt, y = float32(s.ptReco[i]), float32(s.yReco[i])
	})
}

// writeParquet writes rows built by row(i) for i < n, snappy-compressed,
// handing them to the writer in batches.
func writeParquet[T any](ctx context.Context, f *atomicfile.Folder, name string, n int, row func(i int) T) error {
	out, err := f.Create(name)
	if err != nil {
		return err
	}
	w := parquet.NewGenericWriter[T](out, parquet.Compression(&snappy.Codec{}), parquet.CreatedBy("desmear demo", "", ""))
	const batch = 4096
	buf := make([]T, 0, batch)
	for i := range n {
		if i%ctxEvery == 0 {
			if err := ctx.Err(); err != nil {
				return err
			}
		}
		buf = append(buf, row(i))
		if len(buf) == batch || i == n-1 {
			if _, err := w.Write(buf); err != nil {
				return fmt.Errorf("writing %s: %w", name, err)
			}
			buf = buf[:0]
		}
	}
	if err := w.Close(); err != nil {
		return fmt.Errorf("writing %s: %w", name, err)
	}
	return out.Close()
}

func writeSimulationParquet(ctx context.Context, f *atomicfile.Folder, name string, s *sample) error {
	return writeParquet(ctx, f, name, s.len(), func(i int) simRow {
		return simRow{
			PtTrue: s.ptTrue[i], YTrue: s.yTrue[i], PtReco: s.ptReco[i], YReco: s.yReco[i],
			Weight: s.weight[i], PassTruth: s.passTruth[i], PassReco: s.passReco[i],
		}
	})
}

func writeDataParquet(ctx context.Context, f *atomicfile.Folder, name string, s *sample) error {
	return writeParquet(ctx, f, name, s.len(), func(i int) dataRow {
		return dataRow{Pt: s.ptReco[i], Y: s.yReco[i]}
	})
}
