package sparse

import (
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/sparse/sparsetest"
)

// randomMatrix returns a rows×cols matrix where each cell is stored with
// probability density, with every emptyEvery-th row and column left
// empty (0 disables), values in [-0.5, 1.5).
func randomMatrix(t testing.TB, rng *rand.Rand, rows, cols int, density float64, emptyEvery int) *Matrix {
	t.Helper()
	colPtr := make([]int, cols+1)
	var rowIdx []int
	var val []float64
	for j := 0; j < cols; j++ {
		if emptyEvery == 0 || j%emptyEvery != 1 {
			for i := 0; i < rows; i++ {
				if emptyEvery > 0 && i%emptyEvery == 2 {
					continue
				}
				if rng.Float64() < density {
					rowIdx = append(rowIdx, i)
					val = append(val, rng.Float64()*2-0.5)
				}
			}
		}
		colPtr[j+1] = len(val)
	}
	m, err := NewMatrix(rows, cols, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func randomVec(rng *rand.Rand, n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.Float64()*2 - 0.3
	}
	return v
}

// denseRef returns the gonum dense copy of m (gonum is the reference
// library) and the dense copy of |m|, used to scale tolerances.
func denseRef(t *testing.T, m *Matrix) (d, abs *mat.Dense) {
	t.Helper()
	d, err := m.ToDense()
	if err != nil {
		t.Fatal(err)
	}
	r, c := d.Dims()
	abs = mat.NewDense(r, c, nil)
	abs.Apply(func(i, j int, v float64) float64 { return math.Abs(v) }, d)
	return d, abs
}

// mulRef computes want = op(d) v and the scale op(|d|)|v| with gonum.
func mulRef(d, abs *mat.Dense, v []float64, trans bool) (want, scale []float64) {
	var a, aa mat.Matrix = d, abs
	if trans {
		a, aa = d.T(), abs.T()
	}
	r, _ := a.Dims()
	absv := make([]float64, len(v))
	for i, x := range v {
		absv[i] = math.Abs(x)
	}
	w := mat.NewVecDense(r, nil)
	w.MulVec(a, mat.NewVecDense(len(v), append([]float64(nil), v...)))
	s := mat.NewVecDense(r, nil)
	s.MulVec(aa, mat.NewVecDense(len(v), absv))
	return w.RawVector().Data, s.RawVector().Data
}

// checkVec requires |got-want| <= 1e-12 (|A||x|)_i, a relative error of
// 1e-12 with respect to the size of the terms summed.
func checkVec(t *testing.T, what string, got, want, scale []float64) {
	t.Helper()
	for i := range want {
		if d := math.Abs(got[i] - want[i]); d > 1e-12*scale[i] || math.IsNaN(got[i]) {
			t.Fatalf("%s[%d] = %v, want %v (gonum dense), scale %v", what, i, got[i], want[i], scale[i])
		}
	}
}

type shape struct {
	name       string
	rows, cols int
	density    float64
	emptyEvery int
}

var kernelShapes = []shape{
	{"one row", 1, 40, 0.5, 0},
	{"one column", 40, 1, 0.5, 0},
	{"wide", 30, 200, 0.1, 0},
	{"tall", 200, 30, 0.1, 0},
	{"empty rows and columns", 60, 70, 0.2, 5},
	{"all empty", 8, 9, 0, 0},
	// Enough non-zeros for several blocks and the parallel path; every
	// block covers all the rows, so the reduction sums many buffers.
	{"multi-block random", 700, 500, 0.3, 7},
}

// banded3D is the synthetic response of sparsetest.Banded3D as a Matrix.
func banded3D(truth, reco, hood [3]int, perCol int, seed uint64) (*Matrix, error) {
	b, err := sparsetest.Banded3D(truth, reco, hood, perCol, seed)
	if err != nil {
		return nil, err
	}
	return NewMatrix(b.Rows, b.Cols, b.ColPtr, b.RowIdx, b.Val, nil)
}

func kernelMatrices(t *testing.T) []*Matrix {
	rng := rand.New(rand.NewPCG(11, 12))
	var ms []*Matrix
	for _, sh := range kernelShapes {
		ms = append(ms, randomMatrix(t, rng, sh.rows, sh.cols, sh.density, sh.emptyEvery))
	}
	// A banded matrix: its blocks have overlapping row ranges.
	b, err := banded3D([3]int{12, 12, 8}, [3]int{12, 12, 16}, [3]int{3, 3, 4}, 20, 3)
	if err != nil {
		t.Fatal(err)
	}
	ms = append(ms, b)
	// The last two are cut into many small blocks and run on the
	// parallel path, as large matrices are; their blocks' rows overlap
	// several others, so they scatter into buffers.
	for _, m := range ms[len(ms)-2:] {
		smallBlocks(m, 1000)
	}
	// A banded matrix whose blocks only meet their neighbours: it
	// scatters in two phases straight into the destination.
	c, err := banded3D([3]int{8, 8, 24}, [3]int{8, 8, 48}, [3]int{3, 3, 4}, 20, 5)
	if err != nil {
		t.Fatal(err)
	}
	smallBlocks(c, 4000)
	if !c.part.colored || c.part.blocks() < 5 || ms[len(ms)-1].part.colored {
		t.Fatalf("test partitions: colored %v with %d blocks, banded colored %v", c.part.colored, c.part.blocks(), ms[len(ms)-1].part.colored)
	}
	return append(ms, c)
}

// smallBlocks repartitions m into blocks of about minBlock non-zeros and
// lets it use several goroutines.
func smallBlocks(m *Matrix, minBlock int) {
	m.part = newPartitionMin(m.rows, m.colPtr, m.rowIdx, minBlock)
	m.part.parallel = true
}

func TestKernelsMatchDense(t *testing.T) {
	rng := rand.New(rand.NewPCG(13, 14))
	ms := kernelMatrices(t)
	if nb := ms[len(ms)-3].part.blocks(); nb < 4 {
		t.Fatalf("multi-block test matrix has %d block", nb)
	}
	if nb := ms[len(ms)-2].part.blocks(); nb < 16 {
		t.Fatalf("banded test matrix has %d block", nb)
	}
	for k, m := range ms {
		var name string
		switch {
		case k < len(kernelShapes):
			name = kernelShapes[k].name
		case k == len(kernelShapes):
			name = "banded, buffers"
		default:
			name = "banded, two phases"
		}
		t.Run(name, func(t *testing.T) {
			rows, cols := m.Dims()
			d, abs := denseRef(t, m)
			for i := 0; i < rows; i++ {
				for j := 0; j < cols; j++ {
					if m.At(i, j) != d.At(i, j) || m.CSC().At(i, j) != d.At(i, j) {
						t.Fatalf("At(%d,%d) = %v, CSC().At = %v, dense %v", i, j, m.At(i, j), m.CSC().At(i, j), d.At(i, j))
					}
				}
			}
			x, y := randomVec(rng, cols), randomVec(rng, rows)

			// Destinations are prefilled with NaN: the kernels must
			// overwrite them (james-bowman's MulVecTo adds into dst).
			fold := nanVec(rows)
			m.Fold(fold, x)
			want, scale := mulRef(d, abs, x, false)
			checkVec(t, "Fold", fold, want, scale)

			back := nanVec(cols)
			m.BackProject(back, y)
			wantB, scaleB := mulRef(d, abs, y, true)
			checkVec(t, "BackProject", back, wantB, scaleB)

			// Sweep with the update x'_j = 0.5 g_j + x_j: it must see
			// g = Aᵀy and return next = A x'.
			gs := nanVec(cols)
			xs := make([]float64, cols)
			calls := make([]atomic.Int32, cols)
			next := nanVec(rows)
			m.Sweep(next, y, func(j int, g float64) float64 {
				calls[j].Add(1)
				gs[j] = g
				xs[j] = 0.5*g + x[j]
				return xs[j]
			})
			for j := range calls {
				if n := calls[j].Load(); n != 1 {
					t.Fatalf("Sweep called update %d times for column %d", n, j)
				}
			}
			checkVec(t, "Sweep gather", gs, wantB, scaleB)
			wantN, scaleN := mulRef(d, abs, xs, false)
			checkVec(t, "Sweep scatter", next, wantN, scaleN)

			// SweepRows: each fixed row range is handed over once, already
			// holding the final values of next.
			rb := m.RowRanges()
			if rb[0] != 0 || rb[len(rb)-1] != rows && rows > 0 {
				t.Fatalf("RowRanges %v do not cover %d rows", rb, rows)
			}
			nextR := nanVec(rows)
			hits := make([]atomic.Int32, len(rb))
			m.SweepRows(nextR, y, func(j int, g float64) float64 { return 0.5*g + x[j] },
				func(r, lo, hi int) {
					hits[r].Add(1)
					if lo != rb[r] || hi != rb[r+1] || hi-lo > 1<<14 {
						t.Errorf("rows(%d, %d, %d), RowRanges gives [%d, %d)", r, lo, hi, rb[r], rb[r+1])
						return
					}
					for i := lo; i < hi; i++ {
						if math.Float64bits(nextR[i]) != math.Float64bits(next[i]) {
							t.Errorf("rows(%d): next[%d] = %v when handed over, final %v", r, i, nextR[i], next[i])
							return
						}
					}
				})
			for r := 0; r+1 < len(rb); r++ {
				if n := hits[r].Load(); n != 1 {
					t.Fatalf("SweepRows handed range %d over %d times", r, n)
				}
			}

			// SweepHooks: each fixed column range is handed over once, by
			// then holding every update of its columns, and next gets the
			// bits of Sweep.
			cb := m.ColRanges()
			if cb[0] != 0 || cb[len(cb)-1] != cols {
				t.Fatalf("ColRanges %v do not cover %d columns", cb, cols)
			}
			nextH := nanVec(rows)
			xh := nanVec(cols)
			chits := make([]atomic.Int32, len(cb))
			m.SweepHooks(nextH, y, func(j int, g float64) float64 { xh[j] = 0.5*g + x[j]; return xh[j] }, nil,
				func(lo, hi int) {
					r, ok := slices.BinarySearch(cb, lo)
					if !ok || r+1 >= len(cb) || cb[r+1] != hi {
						t.Errorf("cols(%d, %d) is no range of ColRanges %v", lo, hi, cb)
						return
					}
					chits[r].Add(1)
					for j := lo; j < hi; j++ {
						if math.Float64bits(xh[j]) != math.Float64bits(xs[j]) {
							t.Errorf("cols(%d, %d): column %d not updated when handed over", lo, hi, j)
							return
						}
					}
				})
			for r := 0; r+1 < len(cb); r++ {
				if n := chits[r].Load(); n != 1 && cb[r] < cb[r+1] {
					t.Fatalf("SweepHooks handed column range %d over %d times", r, n)
				}
			}
			for i := range next {
				if math.Float64bits(nextH[i]) != math.Float64bits(next[i]) {
					t.Fatalf("SweepHooks: next[%d] = %v, Sweep gives %v", i, nextH[i], next[i])
				}
			}

			ones := func(n int) []float64 {
				v := make([]float64, n)
				for i := range v {
					v[i] = 1
				}
				return v
			}
			cs := nanVec(cols)
			m.ColSums(cs)
			wantC, scaleC := mulRef(d, abs, ones(rows), true)
			checkVec(t, "ColSums", cs, wantC, scaleC)
			rs := nanVec(rows)
			m.RowSums(rs)
			wantR, scaleR := mulRef(d, abs, ones(cols), false)
			checkVec(t, "RowSums", rs, wantR, scaleR)

			f := randomVec(rng, cols)
			sc := m.Clone()
			sc.ScaleCols(f)
			ds := mat.DenseCopyOf(d)
			ds.Apply(func(i, j int, v float64) float64 { return v * f[j] }, ds)
			for i := 0; i < rows; i++ {
				for j := 0; j < cols; j++ {
					if got, want := sc.At(i, j), ds.At(i, j); got != want {
						t.Fatalf("ScaleCols: At(%d,%d) = %v, want %v", i, j, got, want)
					}
					if m.At(i, j) != d.At(i, j) {
						t.Fatalf("ScaleCols on a clone changed the original at (%d,%d)", i, j)
					}
				}
			}
		})
	}
}

func nanVec(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = math.NaN()
	}
	return v
}

// TestNotAGonumMatrix guards against the silent At fallback: gonum's
// VecDense.MulVec accepts any mat.Matrix and, for a type it does not know,
// calls At for every element. *Matrix deliberately lacks T(), so it cannot
// be handed to gonum's generic products by accident.
func TestNotAGonumMatrix(t *testing.T) {
	var m any = &Matrix{}
	if _, ok := m.(mat.Matrix); ok {
		t.Error("*Matrix implements mat.Matrix: gonum's MulVec would use it through At per element")
	}
}

// TestKernelsBitIdentical runs every kernel at GOMAXPROCS 1, 2 and 7 and
// from several goroutines at once; all results must have the same bits.
func TestKernelsBitIdentical(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	rng := rand.New(rand.NewPCG(15, 16))
	ms := kernelMatrices(t)
	// A larger matrix with the default partition.
	big, err := banded3D([3]int{40, 40, 40}, [3]int{40, 40, 80}, [3]int{3, 3, 4}, 20, 4)
	if err != nil {
		t.Fatal(err)
	}
	if !big.part.parallel || big.part.blocks() < 8 {
		t.Fatalf("%d non-zeros gave %d blocks, parallel %v", big.NNZ(), big.part.blocks(), big.part.parallel)
	}
	if !big.part.colored {
		t.Fatal("the default partition of a banded matrix is not two-phase")
	}
	for _, m := range append(ms[len(ms)-3:], big) {
		rows, cols := m.Dims()
		x, y := randomVec(rng, cols), randomVec(rng, rows)
		run := func() [][]float64 {
			f, b, n, r := make([]float64, rows), make([]float64, cols), make([]float64, rows), make([]float64, rows)
			m.Fold(f, x)
			m.BackProject(b, y)
			m.Sweep(n, y, func(j int, g float64) float64 { return g * x[j] })
			m.RowSums(r)
			return [][]float64{f, b, n, r}
		}
		runtime.GOMAXPROCS(1)
		ref := run()
		for _, procs := range []int{2, 7} {
			runtime.GOMAXPROCS(procs)
			var wg sync.WaitGroup
			got := make([][][]float64, 4)
			for g := range got {
				wg.Add(1)
				go func() { defer wg.Done(); got[g] = run() }()
			}
			wg.Wait()
			for g := range got {
				for k := range ref {
					for i := range ref[k] {
						if math.Float64bits(got[g][k][i]) != math.Float64bits(ref[k][i]) {
							t.Fatalf("GOMAXPROCS %d goroutine %d kernel %d element %d: %v, want %v (GOMAXPROCS 1)",
								procs, g, k, i, got[g][k][i], ref[k][i])
						}
					}
				}
			}
		}
	}
}

func TestKernelsNoAllocation(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	rng := rand.New(rand.NewPCG(17, 18))
	for _, m := range kernelMatrices(t)[len(kernelShapes)-3:] { // one single-block matrix too
		rows, cols := m.Dims()
		x, y, dst, back := randomVec(rng, cols), randomVec(rng, rows), make([]float64, rows), make([]float64, cols)
		update := func(j int, g float64) float64 { return g * x[j] }
		part := make([]float64, len(m.RowRanges()))
		hook := func(r, lo, hi int) { part[r] += dst[lo] }
		m.Sweep(dst, y, update) // warm-up
		m.SweepRows(dst, y, update, hook)
		if a := testing.AllocsPerRun(20, func() {
			m.Fold(dst, x)
			m.BackProject(back, y)
			m.Sweep(dst, y, update)
			m.SweepRows(dst, y, update, hook)
			m.RowSums(dst)
			m.ColSums(back)
		}); a != 0 {
			t.Errorf("kernels allocate %v times per call after warm-up (%d blocks)", a, m.part.blocks())
		}
	}
}

func TestKernelDimensionPanics(t *testing.T) {
	m := randomMatrix(t, rand.New(rand.NewPCG(1, 1)), 3, 4, 0.5, 0)
	for name, f := range map[string]func(){
		"Fold":        func() { m.Fold(make([]float64, 4), make([]float64, 4)) },
		"BackProject": func() { m.BackProject(make([]float64, 3), make([]float64, 3)) },
		"Sweep":       func() { m.Sweep(make([]float64, 3), make([]float64, 4), nil) },
		"SweepRows":   func() { m.SweepRows(make([]float64, 4), make([]float64, 3), nil, nil) },
		"ColSums":     func() { m.ColSums(make([]float64, 3)) },
		"RowSums":     func() { m.RowSums(make([]float64, 4)) },
		"ScaleCols":   func() { m.ScaleCols(make([]float64, 3)) },
		"ScaleCols Inf": func() {
			m.ScaleCols([]float64{1, math.Inf(1), 1, 1})
		},
		"At": func() { m.At(3, 0) },
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s with wrong dimensions did not panic", name)
				}
			}()
			f()
		}()
	}
}

func TestToDenseLimit(t *testing.T) {
	m, err := NewMatrix(1<<14, 1<<13, make([]int, 1<<13+1), nil, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := m.ToDense(); err == nil {
		t.Errorf("ToDense of a %d-element matrix did not fail (limit %d)", 1<<27, MaxDenseElements)
	}
	e, _ := NewMatrix(0, 3, make([]int, 4), nil, nil, nil)
	if _, err := e.ToDense(); err == nil {
		t.Error("ToDense of a 0×3 matrix did not fail")
	}
}

func TestWithValues(t *testing.T) {
	m := randomMatrix(t, rand.New(rand.NewPCG(2, 2)), 5, 6, 0.5, 0)
	v := make([]float64, m.NNZ())
	for k := range v {
		v[k] = float64(k + 1)
	}
	n, err := m.WithValues(v, nil)
	if err != nil {
		t.Fatal(err)
	}
	cp, ri := m.ColPtr(), m.RowIdx()
	for j := 0; j < 6; j++ {
		for k := cp[j]; k < cp[j+1]; k++ {
			if n.At(ri[k], j) != v[k] || n.CSC().At(ri[k], j) != v[k] {
				t.Fatalf("WithValues: At(%d,%d) = %v, want %v", ri[k], j, n.At(ri[k], j), v[k])
			}
		}
	}
	if _, err := m.WithValues(v[:1], nil); err == nil && m.NNZ() != 1 {
		t.Error("WithValues accepted a short value slice")
	}
	v[0] = math.Inf(1)
	if _, err := m.WithValues(v, nil); err == nil {
		t.Error("WithValues accepted an infinite value")
	}
}

// TestCSCViewMulVecToAdds documents why the kernels never call
// james-bowman's MulVecTo: it adds into its destination. Our Fold of the
// same matrix overwrites (checked against gonum dense above); here the
// CSC view's product into a destination holding ones must come out as
// ones plus A x, computed with gonum dense as the reference.
func TestCSCViewMulVecToAdds(t *testing.T) {
	m := randomMatrix(t, rand.New(rand.NewPCG(41, 42)), 6, 5, 0.5, 0)
	x := []float64{1, 2, 3, 4, 5}
	d, _ := m.ToDense()
	want := mat.NewVecDense(6, nil)
	want.MulVec(d, mat.NewVecDense(5, x))
	got := []float64{1, 1, 1, 1, 1, 1}
	m.CSC().MulVecTo(got, false, x)
	ours := []float64{1, 1, 1, 1, 1, 1}
	m.Fold(ours, x)
	for i := range got {
		if math.Abs(got[i]-(1+want.AtVec(i))) > 1e-12 {
			t.Logf("james-bowman MulVecTo no longer adds into dst (row %d: %v)", i, got[i])
		}
		if math.Abs(ours[i]-want.AtVec(i)) > 1e-12 {
			t.Errorf("Fold row %d = %v, want %v: it must overwrite dst", i, ours[i], want.AtVec(i))
		}
	}
}

// TestNestedKernelCalls calls kernels of another matrix from inside
// Sweep's update, on every goroutine, with one helper goroutine: waiting
// calls must run queued work instead of blocking the helper pool.
func TestNestedKernelCalls(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(2))
	ms := kernelMatrices(t)
	outer, inner := ms[len(ms)-1], ms[len(ms)-2]
	ir, ic := inner.Dims()
	or, oc := outer.Dims()
	y, next := make([]float64, or), make([]float64, or)
	for i := range y {
		y[i] = 1
	}
	iy := make([]float64, ir)
	for i := range iy {
		iy[i] = 1
	}
	want := make([]float64, ic)
	inner.BackProject(want, iy)
	finished := make(chan struct{})
	go func() {
		defer close(finished)
		outer.Sweep(next, y, func(j int, g float64) float64 {
			if j%97 == 0 {
				got := make([]float64, ic)
				inner.BackProject(got, iy)
				for k := range got {
					if got[k] != want[k] {
						t.Errorf("nested BackProject element %d = %v, want %v", k, got[k], want[k])
						break
					}
				}
			}
			return g
		})
	}()
	select {
	case <-finished:
	case <-time.After(60 * time.Second):
		t.Fatalf("Sweep of a %d×%d matrix with nested kernel calls did not finish", or, oc)
	}
}

// TestNewMatrixRejects feeds NewMatrix and WithValues one broken array
// at a time; each must be refused.
func TestNewMatrixRejects(t *testing.T) {
	inf, nan := math.Inf(1), math.NaN()
	for _, c := range []struct {
		name       string
		rows, cols int
		colPtr, ri []int
		val, sumw2 []float64
	}{
		{"negative rows", -1, 1, []int{0, 0}, nil, nil, nil},
		{"short column pointers", 2, 2, []int{0, 1}, []int{0}, []float64{1}, nil},
		{"first pointer not 0", 2, 1, []int{1, 1}, []int{0}, []float64{1}, nil},
		{"row indices short", 2, 1, []int{0, 2}, []int{0}, []float64{1, 2}, nil},
		{"sumw2 short", 2, 1, []int{0, 1}, []int{0}, []float64{1}, []float64{}},
		{"pointers decrease", 2, 2, []int{0, 2, 1}, []int{0}, []float64{1}, nil},
		{"row out of range", 2, 1, []int{0, 1}, []int{2}, []float64{1}, nil},
		{"negative row", 2, 1, []int{0, 1}, []int{-1}, []float64{1}, nil},
		{"rows repeated", 3, 1, []int{0, 2}, []int{1, 1}, []float64{1, 2}, nil},
		{"rows decreasing", 3, 1, []int{0, 2}, []int{2, 1}, []float64{1, 2}, nil},
		{"infinite value", 2, 1, []int{0, 1}, []int{0}, []float64{inf}, nil},
		{"NaN value", 2, 1, []int{0, 1}, []int{0}, []float64{nan}, nil},
		{"negative sumw2", 2, 1, []int{0, 1}, []int{0}, []float64{1}, []float64{-1}},
		{"NaN sumw2", 2, 1, []int{0, 1}, []int{0}, []float64{1}, []float64{nan}},
	} {
		if _, err := NewMatrix(c.rows, c.cols, c.colPtr, c.ri, c.val, c.sumw2); err == nil {
			t.Errorf("NewMatrix accepted %s", c.name)
		}
	}
	m, err := NewMatrix(2, 1, []int{0, 2}, []int{0, 1}, []float64{1, 2}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for name, w2 := range map[string][]float64{"short": {1}, "negative": {1, -1}, "infinite": {inf, 1}, "NaN": {nan, 1}} {
		if _, err := m.WithValues([]float64{1, 2}, w2); err == nil {
			t.Errorf("WithValues accepted %s squared-weight sums", name)
		}
	}
}
