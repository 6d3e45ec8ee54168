package response_test

import (
	"context"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"github.com/desmear/desmear/unfold/analysis"
	"github.com/desmear/desmear/unfold/internal/eventfile"
)

// benchDir holds the benchmark's Parquet file, made once per test
// binary run and removed by TestMain.
var (
	benchOnce sync.Once
	benchDir  string
	benchErr  error
)

func TestMain(m *testing.M) {
	code := m.Run()
	if benchDir != "" && os.Getenv("DESMEAR_BENCH_KEEP") == "" {
		os.RemoveAll(benchDir)
	}
	os.Exit(code)
}

// benchEvents is the size of BenchmarkFillParquet20M.
const benchEvents = 20_000_000

// benchSample writes n events with three observables at truth and reco
// level (x, y, z uniform on [0, 1), smeared by 0.02 at reco level) and a
// weight, as a Parquet file.
func benchSample(n int) (string, error) {
	benchOnce.Do(func() {
		benchDir, benchErr = os.MkdirTemp("", "desmear-fill-bench-")
		if benchErr != nil {
			return
		}
		if keep := os.Getenv("DESMEAR_BENCH_KEEP"); keep != "" {
			// Reuse (or make once) the file in this folder across runs.
			os.Remove(benchDir)
			benchDir = keep
			if _, err := os.Stat(filepath.Join(keep, "sim.parquet")); err == nil {
				return
			}
			os.MkdirAll(keep, 0o755)
		}
		rng := rand.New(rand.NewPCG(20, 3))
		names := []string{"xt", "yt", "zt", "xr", "yr", "zr", "w"}
		cols := make([][]float64, len(names))
		for c := range cols {
			cols[c] = make([]float64, n)
		}
		for k := 0; k < n; k++ {
			for a := 0; a < 3; a++ {
				t := rng.Float64()
				cols[a][k] = t
				cols[3+a][k] = t + 0.02*rng.NormFloat64()
			}
			cols[6][k] = 0.5 + rng.Float64()
		}
		benchErr = eventfile.WriteParquet(filepath.Join(benchDir, "sim.parquet"), names, cols)
	})
	return filepath.Join(benchDir, "sim.parquet"), benchErr
}

const benchAnalysis = `binning:
  truth:
    regions:
      - name: cube
        axes:
          - {name: x, edges: %[1]s, underflow: true, overflow: true}
          - {name: y, edges: %[1]s, underflow: true, overflow: true}
          - {name: z, edges: %[1]s, underflow: true, overflow: true}
  reco:
    regions:
      - name: cube
        axes:
          - {name: x, edges: %[2]s, underflow: true, overflow: true}
          - {name: y, edges: %[2]s, underflow: true, overflow: true}
          - {name: z, edges: %[2]s, underflow: true, overflow: true}
observables:
  truth: {x: xt, y: yt, z: zt}
  reco: {x: xr, y: yr, z: zr}
simulation:
  - file: %[3]s
    weight: w
data:
  table: n.csv
output:
  folder: out
`

func uniformEdges(n int) string {
	s := "["
	for i := 0; i <= n; i++ {
		if i > 0 {
			s += ", "
		}
		s += fmt.Sprint(float64(i) / float64(n))
	}
	return s + "]"
}

// BenchmarkFillParquet20M builds the response of 20 million simulated
// events with three observables each from a Parquet file, end to end:
// decoding the file, evaluating the observables and the weight,
// locating every event in a 20×20×20 truth and a 40×40×40 reco binning
// (and its reco values in the truth binning, for purity), accumulating
// the migration matrix. Run it with
//
//	go test -run '^$' -bench FillParquet20M -benchtime 3x ./unfold/response
func BenchmarkFillParquet20M(b *testing.B) {
	path, err := benchSample(benchEvents)
	if err != nil {
		b.Fatal(err)
	}
	src := fmt.Sprintf(benchAnalysis, uniformEdges(20), uniformEdges(40), path)
	a, err := analysis.Decode([]byte(src), filepath.Join(benchDir, "analysis.yaml"))
	if err != nil {
		b.Fatal(err)
	}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r, _, err := a.BuildResponse(context.Background(), nil)
		if err != nil {
			b.Fatal(err)
		}
		if r.Summary.Events != benchEvents {
			b.Fatalf("%d events read", r.Summary.Events)
		}
	}
	b.ReportMetric(float64(benchEvents)*float64(b.N)/b.Elapsed().Seconds(), "events/s")
}
