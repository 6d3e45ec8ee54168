package bayes

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// toyDataSets draws T pseudo-data sets around p's data (Poisson, seeded) and,
// with varB, T backgrounds around p's background, for the runners of the
// tests.
func toyDataSets(p *unfold.Problem, T int, varB bool) (n, b [][]float64) {
	rng := rand.New(rand.NewPCG(11, 13))
	for range T {
		x := make([]float64, len(p.Data))
		for i, v := range p.Data {
			// a normal approximation is enough here: any data will do
			x[i] = math.Max(0, math.Round(v+math.Sqrt(v)*rng.NormFloat64()))
		}
		n = append(n, x)
		if varB {
			y := make([]float64, len(p.Data))
			for i, v := range p.Background {
				y[i] = math.Max(0, v+0.5*rng.NormFloat64())
			}
			b = append(b, y)
		}
	}
	return n, b
}

// fitOf runs the iteration on p (mode, settings s) and returns the fit.
func fitOf(t *testing.T, p *unfold.Problem, mode unfold.BackgroundMode, s *Settings) *fit {
	t.Helper()
	pr, err := unfold.Prepare(p, mode)
	if err != nil {
		t.Fatal(err)
	}
	f, err := s.Fit(context.Background(), pr)
	if err != nil {
		t.Fatal(err)
	}
	return f.(*fit)
}

// Every toy of a block gets exactly the bits of a toy runner of its own
// (toyBlock's doc: SweepBlock gives each vector the bits of Sweep, and
// the per-bin arithmetic is the single iteration's): final estimates and
// every step, with and without a background in the model, with a
// fluctuated background per toy, in Subtract mode, for 11 toys (a block
// of 8 and one of 3), on 1 and 2 cores. The problem has more truth bins
// than a chunk of the χ² sums, and chunks straddling column blocks.
func TestToyBlocksMatchOneByOne(t *testing.T) {
	const T = 11
	big := randomProblem(t, 3, 70000, 140000, 6, true)
	nob := randomProblem(t, 4, 3000, 5000, 7, false)
	cases := []struct {
		name string
		p    *unfold.Problem
		mode unfold.BackgroundMode
		varB bool
		s    Settings
	}{
		{"background, per-toy background", big, unfold.InModel, true, Settings{Iterations: 4}},
		{"background, steps", big, unfold.InModel, false, Settings{Iterations: 3, Scan: true}},
		{"no background", nob, unfold.InModel, false, Settings{Iterations: 5}},
		{"no background, steps", nob, unfold.InModel, false, Settings{Iterations: 2, Scan: true}},
		{"subtract", big, unfold.Subtract, false, Settings{Iterations: 2}},
		{"chi2 stop", nob, unfold.InModel, false, Settings{StopChi2: 1e-2, MaxIterations: 50}},
	}
	old := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(old)
	ctx := context.Background()
	for _, c := range cases {
		f := fitOf(t, c.p, c.mode, &c.s)
		if c.p == big && len(newToyBlock(f.m, 1, false).straddle) == 0 {
			t.Fatalf("%s: no chunk straddles two column blocks", c.name)
		}
		n, b := toyDataSets(c.p, T, c.varB)
		// the reference: one toy runner per toy
		var want [][][]float64 // per toy, per step (the last is the estimate)
		for s := range T {
			var bs []float64
			if c.varB {
				bs = b[s]
			}
			r := f.NewToyRunner()
			var steps [][]float64
			if sr, ok := r.(unfold.StepToyRunner); ok {
				if err := sr.RunSteps(ctx, n[s], bs, func(_ int, est []float64) { steps = append(steps, append([]float64(nil), est...)) }); err != nil {
					t.Fatal(err)
				}
			}
			est, err := r.Run(ctx, n[s], bs)
			if err != nil {
				t.Fatal(err)
			}
			want = append(want, append(steps, append([]float64(nil), est...)))
		}
		for _, procs := range []int{1, 2} {
			runtime.GOMAXPROCS(procs)
			r := f.NewToyBlockRunner()
			if r == nil {
				t.Fatalf("%s: no block runner", c.name)
			}
			for first := 0; first < T; first += unfold.ToyBlock {
				k := min(unfold.ToyBlock, T-first)
				var bk [][]float64
				if c.varB {
					bk = b[first : first+k]
				}
				got := make([][][]float64, k)
				est, err := r.RunBlock(ctx, n[first:first+k], bk, func(s, step int, e []float64) {
					if step != len(got[s]) {
						t.Fatalf("%s: toy %d reported step %d after %d steps", c.name, first+s, step, len(got[s]))
					}
					got[s] = append(got[s], append([]float64(nil), e...))
				})
				if err != nil {
					t.Fatal(err)
				}
				for s := range k {
					w := want[first+s]
					if c.s.Scan != (len(got[s]) > 0) || (c.s.Scan && len(got[s]) != len(w)-1) {
						t.Fatalf("%s: toy %d: %d steps reported, want %d", c.name, first+s, len(got[s]), len(w)-1)
					}
					got[s] = append(got[s], est[s])
					for q := range got[s] {
						for j := range got[s][q] {
							if got[s][q][j] != w[q][j] {
								t.Fatalf("%s, %d cores: toy %d step %d bin %d: block %v, alone %v", c.name, procs, first+s, q, j, got[s][q][j], w[q][j])
							}
						}
					}
				}
			}
		}
		runtime.GOMAXPROCS(old)
	}
}

// The toys' variances through Unfold are the same bits in blocks and one
// by one (the blocks run in toy order), and on 1 and 2 cores: per-bin
// variances, those of every step, with a background varied per toy.
func TestToyVariancesBlocksSameBits(t *testing.T) {
	p := randomProblem(t, 8, 40000, 90000, 6, true)
	p.BackgroundVariance = p.Background
	s := &unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: 13, Seed: 3}
	m := &Settings{Iterations: 3, Scan: true}
	old := runtime.GOMAXPROCS(0)
	defer func() { runtime.GOMAXPROCS(old); perToy = false }()
	run := func(one bool, procs int) *unfold.Result {
		perToy = one
		runtime.GOMAXPROCS(procs)
		res, err := unfold.Unfold(context.Background(), p, s, m)
		if err != nil {
			t.Fatal(err)
		}
		return res
	}
	ref := run(true, 2)
	for _, procs := range []int{1, 2} {
		got := run(false, procs)
		for j := range ref.Uncertainty {
			if got.Uncertainty[j] != ref.Uncertainty[j] {
				t.Fatalf("%d cores: bin %d: uncertainty %v in blocks, %v one by one", procs, j, got.Uncertainty[j], ref.Uncertainty[j])
			}
		}
		if len(got.StepVariance) != 4 || len(ref.StepVariance) != 4 {
			t.Fatalf("steps: %d in blocks, %d one by one, want 4", len(got.StepVariance), len(ref.StepVariance))
		}
		for k := range ref.StepVariance {
			for j := range ref.StepVariance[k] {
				if got.StepVariance[k][j] != ref.StepVariance[k][j] {
					t.Fatalf("%d cores: step %d bin %d: %v in blocks, %v one by one", procs, k, j, got.StepVariance[k][j], ref.StepVariance[k][j])
				}
			}
		}
	}
}

// A toy whose iteration overflows fails in a block as it does alone: a
// *unfold.NumericalError naming the same iteration.
func TestToyBlockOverflow(t *testing.T) {
	p := randomProblem(t, 4, 300, 500, 7, false)
	f := fitOf(t, p, unfold.InModel, &Settings{Iterations: 3})
	n, _ := toyDataSets(p, 3, false)
	for i := range n[1] {
		n[1][i] *= 1e306 // Σ μ overflows
	}
	ctx := context.Background()
	_, errOne := f.NewToyRunner().Run(ctx, n[1], nil)
	_, errBlock := f.NewToyBlockRunner().RunBlock(ctx, n, nil, nil)
	var a, b *unfold.NumericalError
	if !errors.As(errOne, &a) || !errors.As(errBlock, &b) || a.Iteration != b.Iteration {
		t.Fatalf("alone: %v; in a block: %v", errOne, errBlock)
	}
}

// Diagonal response (method.md §7 Exact properties of the iteration,
// item 5; G. D'Agostini, Nucl. Instrum. Meth. A362 (1995) 487): every
// toy's iteration gives n_j/eps_j after one step, so over toys
// n_j ~ Poisson(λ_j) the ensemble has mean λ_j/eps_j and variance
// λ_j/eps_j² (the Poisson mean and variance λ scaled by 1/eps_j and
// 1/eps_j², common practice), what the toys of method.md §9 Probes and
// toys estimate. The toys are drawn here by inversion of the Poisson
// CDF (sequential search, common practice) and unfolded in blocks; the mean is checked within 5 standard errors, the variance
// within 5 standard precisions (the variance of a sample variance of
// Poisson counts, (μ4 − σ⁴(T−3)/(T−1))/T with μ4 = λ + 3λ², common
// practice). The estimates of every toy are n_j/eps_j to rounding.
func TestToyBlockDiagonalClosedForm(t *testing.T) {
	const nt, T = 40, 403
	rng := rand.New(rand.NewPCG(5, 6))
	colPtr, rowIdx, val := []int{0}, []int{}, []float64{}
	gen, eps, lambda := make([]float64, nt), make([]float64, nt), make([]float64, nt)
	for j := range nt {
		gen[j] = 1000
		eps[j] = 0.3 + 0.6*rng.Float64()
		lambda[j] = 5 + 100*rng.Float64()
		rowIdx = append(rowIdx, j)
		val = append(val, eps[j]*gen[j])
		colPtr = append(colPtr, j+1)
	}
	a, err := sparse.NewMatrix(nt, nt, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	p := &unfold.Problem{Migrations: a, Generated: gen, Data: lambda}
	f := fitOf(t, p, unfold.InModel, &Settings{Iterations: 4})
	r := f.NewToyBlockRunner()
	poisson := func(l float64) float64 { // inversion by sequential search
		u, k, pk := rng.Float64(), 0, math.Exp(-l)
		c := pk
		for u > c {
			k++
			pk *= l / float64(k)
			c += pk
		}
		return float64(k)
	}
	sum, sum2 := make([]float64, nt), make([]float64, nt)
	for first := 0; first < T; first += unfold.ToyBlock {
		k := min(unfold.ToyBlock, T-first)
		n := make([][]float64, k)
		for s := range n {
			n[s] = make([]float64, nt)
			for j := range nt {
				n[s][j] = poisson(lambda[j])
			}
		}
		est, err := r.RunBlock(context.Background(), n, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		for s, e := range est {
			for j, x := range e {
				if w := n[s][j] / eps[j]; math.Abs(x-w) > 1e-12*w {
					t.Fatalf("toy %d bin %d: %v, want n/eps = %v", first+s, j, x, w)
				}
				sum[j] += x
				sum2[j] += x * x
			}
		}
	}
	for j := range nt {
		mean := sum[j] / T
		v := (sum2[j] - T*mean*mean) / (T - 1)
		l, e2 := lambda[j], eps[j]*eps[j]
		if d := math.Abs(mean - l/eps[j]); d > 5*math.Sqrt(l/e2/T) {
			t.Errorf("bin %d: mean %v, want λ/eps = %v", j, mean, l/eps[j])
		}
		mu4 := l + 3*l*l
		sd := math.Sqrt((mu4 - l*l*(T-3)/(T-1)) / T)
		if d := math.Abs(v*e2 - l); d > 5*sd {
			t.Errorf("bin %d: variance %v, want λ/eps² = %v", j, v, l/e2)
		}
	}
}

// The overflow check of a block sums the χ² chunks straddling two column
// blocks after the sweep: a non-finite μ(k+1) of one toy there fails the
// check (the single iteration's rule, iterator.compare), a finite one
// does not.
func TestToyBlockCheckStraddlingChunks(t *testing.T) {
	p := randomProblem(t, 3, 70000, 140000, 6, false)
	f := fitOf(t, p, unfold.InModel, &Settings{Iterations: 1})
	tb := newToyBlock(f.m, 1, false)
	if len(tb.straddle) == 0 {
		t.Fatal("no chunk straddles two column blocks")
	}
	n, _ := toyDataSets(p, 3, false)
	if _, err := tb.RunBlock(context.Background(), n, nil, nil); err != nil {
		t.Fatal(err)
	}
	// after the swap: μ(1) in tb.mu; check compares tb.next with tb.mu
	tb.mu, tb.next = tb.next, tb.mu
	if err := tb.check(1, 3); err != nil {
		t.Fatalf("finite values: %v", err)
	}
	j := tb.straddle[0]*parallel.ChunkLen + 7
	tb.next[j*3+2] = math.Inf(1)
	var ne *unfold.NumericalError
	if err := tb.check(1, 3); !errors.As(err, &ne) || ne.Iteration != 1 {
		t.Fatalf("an infinite estimate in a straddling chunk: %v, want a *unfold.NumericalError at iteration 1", err)
	}
}
