package events

import (
	"context"
	"fmt"
	"math/rand/v2"
	"path/filepath"
	"sync"
	"testing"

	"github.com/desmear/desmear/unfold/inputs/observable"
	"github.com/desmear/desmear/unfold/internal/eventfile"
)

const benchRows = 4 << 20

var benchFiles struct {
	once  sync.Once
	dir   string
	names []string
	err   error
}

// benchInputs writes the benchmark sample once per process: benchRows
// events of 5 float64 columns of random normals, as Parquet, ROOT and CSV
// (CSV with a tenth of the rows).
func benchInputs(b *testing.B) (dir string, names []string) { return benchInputsT(b) }

func benchInputsT(b testing.TB) (dir string, names []string) {
	benchFiles.once.Do(func() {
		benchFiles.dir, benchFiles.err = osMkdirTemp()
		if benchFiles.err != nil {
			return
		}
		rng := rand.New(rand.NewPCG(11, 12))
		names := []string{"pt_true", "pt_reco", "y_true", "y_reco", "weight"}
		cols := make([][]float64, len(names))
		for c := range cols {
			cols[c] = make([]float64, benchRows)
			for k := range cols[c] {
				cols[c][k] = rng.NormFloat64()
			}
		}
		benchFiles.names = names
		d := benchFiles.dir
		if benchFiles.err = eventfile.WriteParquet(filepath.Join(d, "bench.parquet"), names, cols); benchFiles.err != nil {
			return
		}
		if benchFiles.err = eventfile.WriteROOT(filepath.Join(d, "bench.root"), "events", names, cols); benchFiles.err != nil {
			return
		}
		small := make([][]float64, len(cols))
		for c := range cols {
			small[c] = cols[c][:benchRows/10]
		}
		benchFiles.err = eventfile.WriteCSV(filepath.Join(d, "bench.csv"), names, small)
	})
	if benchFiles.err != nil {
		b.Fatal(benchFiles.err)
	}
	return benchFiles.dir, benchFiles.names
}

func benchRead(b *testing.B, file string, rows int64) { benchReadOpt(b, file, rows, Options{}) }

func benchReadOpt(b *testing.B, file string, rows int64, opt Options) {
	dir, names := benchInputs(b)
	src, err := Open(filepath.Join(dir, file), opt)
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	b.SetBytes(rows * int64(len(names)) * 8)
	b.ResetTimer()
	for range b.N {
		var n int64
		var s float64
		err := src.Read(context.Background(), names, 4096, func(bt *Batch) error {
			n += int64(bt.Len)
			s += bt.Cols[0][0]
			return nil
		})
		if err != nil {
			b.Fatal(err)
		}
		if n != rows {
			b.Fatalf("read %d rows, want %d", n, rows)
		}
	}
	b.ReportMetric(float64(rows)*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
}

// BenchmarkParquetRead decodes 5 float64 columns of a Snappy-compressed
// Parquet file written by eventfile.WriteParquet.
func BenchmarkParquetRead(b *testing.B) { benchRead(b, "bench.parquet", benchRows) }

// BenchmarkROOTRead reads 5 float64 branches of an LZ4-compressed TTree
// written by eventfile.WriteROOT, with 1 and 2 decoding goroutines.
func BenchmarkROOTRead(b *testing.B) {
	for _, w := range []int{1, 2} {
		b.Run(fmt.Sprintf("workers=%d", w), func(b *testing.B) { benchReadOpt(b, "bench.root", benchRows, Options{Workers: w}) })
	}
}

// BenchmarkCSVRead parses 5 columns of a CSV file written by eventfile.WriteCSV.
func BenchmarkCSVRead(b *testing.B) { benchRead(b, "bench.csv", benchRows/10) }

// BenchmarkParquetObservables decodes the Parquet sample and evaluates
// four observables per event on it, the per-event work of a response fill
// before the bins are located: an upper bound for the fill rate.
func BenchmarkParquetObservables(b *testing.B) {
	dir, names := benchInputs(b)
	src, err := Open(filepath.Join(dir, "bench.parquet"), Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	var exprs []*observable.Expr
	for _, s := range []string{"abs(y_true)", "abs(y_reco)", "pt_reco > 0 && abs(y_reco) < 2.5", "weight * 1.5"} {
		exprs = append(exprs, observable.MustCompile(s, names))
	}
	out := make([]float64, 4096)
	b.ResetTimer()
	for range b.N {
		err := src.Read(context.Background(), names, 4096, func(bt *Batch) error {
			for _, e := range exprs {
				e.Eval(out[:bt.Len], bt.Cols)
			}
			return nil
		})
		if err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(benchRows)*float64(b.N)/b.Elapsed().Seconds()/1e6, "Mrows/s")
}
