package sparse

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// SweepBlock is k Sweeps sharing one pass over the matrix: every vector
// must get the bits of its own Sweep (which TestKernelsMatchDense checks
// against gonum's dense product), on every partition kind (one block,
// buffered blocks, two-phase blocks) and any number of cores, through the
// Go loops and, where the build has it, the assembly loop for 8 vectors.
func TestSweepBlockMatchesSweep(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	defer func(old bool) { useAVX = old }(useAVX)
	paths := []bool{false}
	if useAVX {
		paths = append(paths, true)
	}
	for _, asm := range paths {
		useAVX = asm
		sweepBlockMatchesSweep(t)
	}
}

func sweepBlockMatchesSweep(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for mi, m := range kernelMatrices(t) {
		rows, cols := m.Dims()
		for _, k := range []int{1, 3, 8, 9} {
			ys := make([][]float64, k)
			xs := make([][]float64, k) // per-column factors of each vector
			y := make([]float64, k*rows)
			for s := range ys {
				ys[s], xs[s] = randomVec(rng, rows), randomVec(rng, cols)
				for i, v := range ys[s] {
					y[i*k+s] = v
				}
			}
			// want: one Sweep per vector; the update records g as well
			want := make([][]float64, k)
			wantG := make([][]float64, k)
			for s := range want {
				want[s], wantG[s] = make([]float64, rows), make([]float64, cols)
				m.Sweep(want[s], ys[s], func(j int, g float64) float64 {
					wantG[s][j] = g
					return g * xs[s][j]
				})
			}
			for _, procs := range []int{1, 2, 7} {
				runtime.GOMAXPROCS(procs)
				next := randomVec(rng, k*rows) // overwritten
				gotG := make([]float64, k*cols)
				m.SweepBlock(next, y, k, func(j int, g, x []float64) {
					for s := range x {
						gotG[j*k+s] = g[s]
						x[s] = g[s] * xs[s][j]
					}
				})
				for s := 0; s < k; s++ {
					for j := 0; j < cols; j++ {
						if math.Float64bits(gotG[j*k+s]) != math.Float64bits(wantG[s][j]) {
							t.Fatalf("assembly %v, matrix %d, k %d, GOMAXPROCS %d: gather of vector %d column %d is %v, Sweep gives %v", useAVX, mi, k, procs, s, j, gotG[j*k+s], wantG[s][j])
						}
					}
					for i := 0; i < rows; i++ {
						if math.Float64bits(next[i*k+s]) != math.Float64bits(want[s][i]) {
							t.Fatalf("assembly %v, matrix %d, k %d, GOMAXPROCS %d: vector %d row %d is %v, Sweep gives %v", useAVX, mi, k, procs, s, i, next[i*k+s], want[s][i])
						}
					}
				}
			}
		}
	}
}

func TestSweepBlockNoAllocation(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	rng := rand.New(rand.NewPCG(23, 24))
	for _, m := range kernelMatrices(t)[len(kernelShapes)-3:] {
		rows, cols := m.Dims()
		const k = 4
		x, y, next := randomVec(rng, cols), randomVec(rng, k*rows), make([]float64, k*rows)
		update := func(j int, g, out []float64) {
			for s := range out {
				out[s] = g[s] * x[j]
			}
		}
		m.SweepBlock(next, y, k, update) // warm-up
		if a := testing.AllocsPerRun(20, func() { m.SweepBlock(next, y, k, update) }); a != 0 {
			t.Errorf("SweepBlock allocates %v times per call after warm-up (%d blocks)", a, m.part.blocks())
		}
	}
}

func TestSweepBlockPanics(t *testing.T) {
	m := kernelMatrices(t)[0]
	rows, _ := m.Dims()
	for _, c := range []struct {
		name       string
		next, y, k int
	}{{"k 0", 0, 0, 0}, {"short next", 2*rows - 1, 2 * rows, 2}, {"short y", 2 * rows, rows, 2}} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s: no panic", c.name)
				}
			}()
			m.SweepBlock(make([]float64, c.next), make([]float64, c.y), c.k, func(int, []float64, []float64) {})
		}()
	}
}
