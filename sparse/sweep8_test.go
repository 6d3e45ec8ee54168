package sparse

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"
)

// specialValue returns one of the values where floating-point kernels
// differ when they do not do the same operations in the same order (common
// practice): signed zeros, subnormals, values whose products overflow,
// infinities, and NaNs with random payloads and signs (quiet and
// signalling), so that two different NaNs meet in the sums.
func specialValue(rng *rand.Rand) float64 {
	switch rng.IntN(9) {
	case 0:
		return 0
	case 1:
		return math.Copysign(0, -1)
	case 2:
		return math.Float64frombits(rng.Uint64N(1<<52-1) + 1) // subnormal
	case 3:
		return -math.SmallestNonzeroFloat64
	case 4:
		return (rng.Float64() - 0.5) * math.MaxFloat64
	case 5:
		return math.Inf(1)
	case 6:
		return math.Inf(-1)
	case 7:
		return math.NaN()
	default:
		return math.Float64frombits(rng.Uint64()&(1<<63|1<<52-1) | 0x7ff<<52 | 1) // NaN, random payload
	}
}

// specialVec is a random vector where a fraction rate of the elements
// are special values.
func specialVec(rng *rand.Rand, n int, rate float64) []float64 {
	v := make([]float64, n)
	for i := range v {
		if rng.Float64() < rate {
			v[i] = specialValue(rng)
		} else {
			v[i] = rng.NormFloat64()
		}
	}
	return v
}

// lengthsMatrix returns a matrix with columns of every length 0..17,
// several times each, and a few long ones, in random order, with finite
// values that include signed zeros, subnormals and values large enough to
// overflow their products.
func lengthsMatrix(t testing.TB, rng *rand.Rand, rows int) *Matrix {
	t.Helper()
	var lens []int
	for rep := 0; rep < 6; rep++ {
		for n := 0; n <= 17; n++ {
			lens = append(lens, n)
		}
	}
	lens = append(lens, 31, 64, 203, 1000, rows)
	rng.Shuffle(len(lens), func(a, b int) { lens[a], lens[b] = lens[b], lens[a] })
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	for _, n := range lens {
		for _, i := range rng.Perm(rows)[:n] {
			rowIdx = append(rowIdx, i)
		}
		col := rowIdx[len(rowIdx)-n:]
		for a := 1; a < len(col); a++ { // sort the column's rows
			for b := a; b > 0 && col[b] < col[b-1]; b-- {
				col[b], col[b-1] = col[b-1], col[b]
			}
		}
		for range n {
			v := rng.NormFloat64()
			if rng.IntN(8) == 0 {
				for v = specialValue(rng); math.IsNaN(v) || math.IsInf(v, 0); v = specialValue(rng) {
				}
			}
			val = append(val, v)
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	m, err := NewMatrix(rows, len(lens), colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// sweep8Run runs SweepBlock with 8 vectors through the assembly loop or
// the Go loop and returns next and every gathered g (column-major, 8 per
// column). The update sets x[s] to the special value xs[j*8+s] where
// special[j*8+s], else to g[s] times it.
func sweep8Run(m *Matrix, asm bool, y, xs []float64, special []bool) (next, gs []float64) {
	defer func(old bool) { useAVX = old }(useAVX)
	useAVX = asm
	rows, cols := m.Dims()
	next = make([]float64, 8*rows)
	for i := range next {
		next[i] = math.NaN() // overwritten
	}
	gs = make([]float64, 8*cols)
	m.SweepBlock(next, y, 8, func(j int, g, x []float64) {
		for s := range x {
			gs[j*8+s] = g[s]
			if special[j*8+s] {
				x[s] = xs[j*8+s]
			} else {
				x[s] = g[s] * xs[j*8+s]
			}
		}
	})
	return next, gs
}

// The assembly loop of the 8-vector SweepBlock must give the bits of the
// Go loop it replaces (sweep8Go, checked against Sweep and through it
// against gonum's dense product by TestSweepBlockMatchesSweep), for
// columns of every length, special values in y, in the matrix and in the
// update's x, every partition kind and any number of cores.
func TestSweep8AssemblyBits(t *testing.T) {
	if !useAVX {
		t.Skip("no assembly loop in this build (not amd64 with AVX, or the purego tag): sweep8 is the Go loop")
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	rng := rand.New(rand.NewPCG(31, 32))
	ms := kernelMatrices(t)
	long := lengthsMatrix(t, rng, 2000)
	many := lengthsMatrix(t, rng, 2000)
	smallBlocks(many, 2000) // buffered blocks on the parallel path
	ms = append(ms, long, many)
	for mi, m := range ms {
		rows, cols := m.Dims()
		for _, rate := range []float64{0, 0.02, 0.3} {
			y := specialVec(rng, 8*rows, rate)
			xs := specialVec(rng, 8*cols, rate)
			special := make([]bool, len(xs))
			for i := range special {
				special[i] = rng.Float64() < rate
			}
			wantNext, wantG := sweep8Run(m, false, y, xs, special)
			// Where two NaNs meet in an add, x86 keeps the payload of the
			// first operand (common practice), and which one that is in
			// the Go loop is the compiler's choice, not the language's:
			// the assembly follows the normal build's, and the race
			// detector's instrumentation changes it, so a race build
			// requires only a NaN where the Go loop gives a NaN.
			same := func(a, b float64) bool {
				return math.Float64bits(a) == math.Float64bits(b) || raceBuild && math.IsNaN(a) && math.IsNaN(b)
			}
			for _, procs := range []int{1, 2, 5} {
				runtime.GOMAXPROCS(procs)
				next, g := sweep8Run(m, true, y, xs, special)
				for i := range g {
					// reference: the Go loop sweep8Go (bits, common practice)
					if !same(g[i], wantG[i]) {
						t.Fatalf("matrix %d, rate %v, GOMAXPROCS %d: gather of vector %d column %d is %v (%#x), the Go loop gives %v (%#x)",
							mi, rate, procs, i%8, i/8, g[i], math.Float64bits(g[i]), wantG[i], math.Float64bits(wantG[i]))
					}
				}
				for i := range next {
					if !same(next[i], wantNext[i]) {
						t.Fatalf("matrix %d, rate %v, GOMAXPROCS %d: vector %d row %d is %v (%#x), the Go loop gives %v (%#x)",
							mi, rate, procs, i%8, i/8, next[i], math.Float64bits(next[i]), wantNext[i], math.Float64bits(wantNext[i]))
					}
				}
			}
		}
	}
}
