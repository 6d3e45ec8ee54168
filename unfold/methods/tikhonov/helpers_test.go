package tikhonov

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
)

// readScheme reads a scheme of the repository's shared test data.
func readScheme(t testing.TB, name string) *binning.Scheme {
	t.Helper()
	s, err := binning.ReadFile("../../../testdata/" + name)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// gridScheme returns a scheme of one rectangular region with the given
// edges per axis (uneven widths on purpose), with under- and overflow
// on the first axis, and a second one-axis region.
func gridScheme(t testing.TB, edges ...[]float64) *binning.Scheme {
	t.Helper()
	var axes []*binning.Axis
	for k, e := range edges {
		a, err := binning.NewAxis(string(rune('u'+k)), "", e, k == 0, k == 0)
		if err != nil {
			t.Fatal(err)
		}
		axes = append(axes, a)
	}
	r, err := binning.NewRegion("grid", axes...)
	if err != nil {
		t.Fatal(err)
	}
	a, _ := binning.NewAxis("z", "", []float64{0, 1, 3, 4, 7}, false, false)
	r2, err := binning.NewRegion("side", a)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(r, r2)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// randomResponse builds an invented migration matrix with nt truth and
// nr ≥ nt reco bins: truth bin j reaches reco bin j·nr/nt with the
// largest share (so that the response has full column rank) and
// perCol−1 random others; efficiencies in [0.5, 0.95]; generated counts
// around 1e4. The truth bins in skip get no migrations (undetermined).
func randomResponse(t testing.TB, seed uint64, nt, nr, perCol int, skip ...int) (*sparse.Matrix, []float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 11))
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	gen := make([]float64, nt)
	for j := 0; j < nt; j++ {
		g := 5000 + 10000*rng.Float64()
		gen[j] = g
		skipped := false
		for _, s := range skip {
			skipped = skipped || s == j
		}
		if !skipped {
			eff := 0.5 + 0.45*rng.Float64()
			rows := map[int]float64{j * nr / nt: 3}
			for len(rows) < min(perCol, nr) {
				rows[rng.IntN(nr)] += 0.2 + rng.Float64()
			}
			var sum float64
			for i := 0; i < nr; i++ {
				sum += rows[i]
			}
			for i := 0; i < nr; i++ {
				if w, ok := rows[i]; ok {
					rowIdx = append(rowIdx, i)
					val = append(val, g*eff*w/sum)
				}
			}
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return a, gen
}

// foldedProblem returns the problem with noise-free data n = R x + b.
func foldedProblem(a *sparse.Matrix, gen, x, b []float64) *unfold.Problem {
	nr, nt := a.Dims()
	scaled := make([]float64, nt)
	for j := range scaled {
		scaled[j] = x[j] / gen[j]
	}
	n := make([]float64, nr)
	a.Fold(n, scaled)
	for i, v := range b {
		n[i] += v
	}
	return &unfold.Problem{Migrations: a, Generated: gen, Data: n, Background: b}
}

// noisyProblem is foldedProblem with Gaussian noise of Poisson size on n.
func noisyProblem(a *sparse.Matrix, gen, x []float64, seed uint64) *unfold.Problem {
	p := foldedProblem(a, gen, x, nil)
	rng := rand.New(rand.NewPCG(seed, 3))
	for i, v := range p.Data {
		p.Data[i] = math.Max(0, math.Round(v+math.Sqrt(v)*rng.NormFloat64()))
	}
	return p
}

func relDiff(a, b []float64) float64 {
	var d, n float64
	for i := range a {
		d = math.Max(d, math.Abs(a[i]-b[i]))
		n = math.Max(n, math.Abs(b[i]))
	}
	if n == 0 {
		return d
	}
	return d / n
}

// smearedResponse is an invented ill-posed response: truth bin j is
// reconstructed around reco bin (j+½)·nr/nt with a Gaussian of width
// sigma reco bins, efficiency 0.8, generated count 1e4.
func smearedResponse(t testing.TB, nt, nr int, sigma float64) (*sparse.Matrix, []float64) {
	t.Helper()
	colPtr := []int{0}
	var rowIdx []int
	var val []float64
	gen := make([]float64, nt)
	for j := 0; j < nt; j++ {
		gen[j] = 1e4
		c := (float64(j) + 0.5) * float64(nr) / float64(nt)
		lo, hi := max(0, int(c-4*sigma)), min(nr, int(c+4*sigma)+1)
		var sum float64
		w := make([]float64, hi-lo)
		for i := range w {
			d := (float64(lo+i) + 0.5 - c) / sigma
			w[i] = math.Exp(-d * d / 2)
			sum += w[i]
		}
		for i, x := range w {
			rowIdx = append(rowIdx, lo+i)
			val = append(val, 0.8*gen[j]*x/sum)
		}
		colPtr = append(colPtr, len(rowIdx))
	}
	a, err := sparse.NewMatrix(nr, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return a, gen
}
