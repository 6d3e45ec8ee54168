package unfold

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// TestPoissonRandDistribution draws 200,000 counts at means on both
// sides of the switch between the sequential search and PTRS and checks
// them against the Poisson pmf: a chi-square goodness of fit over cells
// of at least 20 expected counts (Pearson 1900; the pmf and distribution
// function from gonum's distuv.Poisson, the p-value from its
// distuv.ChiSquared), and the sample mean and variance against mu to five
// standard errors, sqrt(mu/N) and sqrt((mu + 2mu²)/N) (the fourth central
// moment of Poisson(mu) is mu + 3mu², common practice); the methods are
// those of method.md §26 Poisson draws of the toys.
func TestPoissonRandDistribution(t *testing.T) {
	const n = 200_000
	for _, mu := range []float64{0.05, 0.7, 3, 9.99, 10, 10.5, 27, 150, 2000, 4321, 2.5e6} {
		rng := rand.NewPCG(7, uint64(mu*1000))
		counts := map[int]int{}
		var sum, sum2 float64
		for range n {
			k := poissonRand(rng, mu)
			if k != math.Trunc(k) || k < 0 {
				t.Fatalf("mu %g: draw %g is not a count", mu, k)
			}
			counts[int(k)]++
			sum += k
			sum2 += k * k
		}
		mean := sum / n
		variance := (sum2 - n*mean*mean) / (n - 1)
		// Five standard errors of the sample mean and variance (common practice).
		if se := math.Sqrt(mu / n); math.Abs(mean-mu) > 5*se {
			t.Errorf("mu %g: mean %g, want within %g", mu, mean, 5*se)
		}
		if se := math.Sqrt((mu + 2*mu*mu) / n); math.Abs(variance-mu) > 5*se {
			t.Errorf("mu %g: variance %g, want within %g", mu, variance, 5*se)
		}

		// Pearson's chi-square against the pmf (gonum's distuv.Poisson).
		d := distuv.Poisson{Lambda: mu}
		s := math.Sqrt(mu)
		lo := max(0, int(mu-10*s-5))
		hi := int(mu + 10*s + 10)
		var os, es []float64 // observed and expected counts per cell
		var obs, exp float64
		// Everything below lo as the first cell.
		for k, c := range counts {
			if k < lo {
				obs += float64(c)
			}
		}
		if lo > 0 {
			exp = n * d.CDF(float64(lo-1))
		}
		for k := lo; k <= hi; k++ {
			obs += float64(counts[k])
			exp += n * d.Prob(float64(k))
			if exp >= 20 {
				os, es = append(os, obs), append(es, exp)
				obs, exp = 0, 0
			}
		}
		for k, c := range counts {
			if k > hi {
				obs += float64(c)
			}
		}
		exp += n * d.Survival(float64(hi))
		// The remainder joins the last cell.
		os[len(os)-1] += obs
		es[len(es)-1] += exp
		var chi2 float64
		for i := range os {
			chi2 += (os[i] - es[i]) * (os[i] - es[i]) / es[i]
		}
		cells := len(os)
		p := distuv.ChiSquared{K: float64(cells - 1)}.Survival(chi2)
		if p < 1e-3 {
			t.Errorf("mu %g: chi-square %g over %d cells, p-value %g", mu, chi2, cells, p)
		}
	}
}

// TestPoissonRandZeroMean checks the edge of the domain: a mean of zero
// or below (and NaN) gives 0 without drawing.
func TestPoissonRandZeroMean(t *testing.T) {
	rng := rand.NewPCG(1, 2)
	for _, mu := range []float64{0, -1, math.NaN()} {
		if k := poissonRand(rng, mu); k != 0 {
			t.Errorf("mu %g: got %g, want 0", mu, k)
		}
	}
	want := rand.NewPCG(1, 2).Uint64()
	if got := rng.Uint64(); got != want {
		t.Errorf("a zero mean consumed uniforms from the stream")
	}
}

// BenchmarkPoissonRand draws counts at a few means with poissonRand,
// with the constants of the mean formed once (as the toys do), and, as
// the reference in the same run, with gonum's distuv.Poisson.Rand.
func BenchmarkPoissonRand(b *testing.B) {
	for _, mu := range []float64{3, 30, 300} {
		b.Run(fmt.Sprintf("mu=%g/ours", mu), func(b *testing.B) {
			rng := rand.NewPCG(1, 2)
			var s float64
			for range b.N {
				s += poissonRand(rng, mu)
			}
			sink = s
		})
		b.Run(fmt.Sprintf("mu=%g/ours-formed", mu), func(b *testing.B) {
			rng := rand.NewPCG(1, 2)
			c := newPoissonMean(mu)
			var s float64
			for range b.N {
				s += c.rand(rng, mu)
			}
			sink = s
		})
		b.Run(fmt.Sprintf("mu=%g/gonum", mu), func(b *testing.B) {
			d := distuv.Poisson{Lambda: mu, Src: rand.NewPCG(1, 2)}
			var s float64
			for range b.N {
				s += d.Rand()
			}
			sink = s
		})
	}
}

var sink float64

// TestUniformIsRandFloat64: uniform forms from a PCG output the value
// math/rand/v2's Rand.Float64 forms from the same output (the standard
// library as the reference), so the background's normal draws and the
// counts share one stream.
func TestUniformIsRandFloat64(t *testing.T) {
	a, b := rand.NewPCG(3, 4), rand.New(rand.NewPCG(3, 4))
	for i := range 1000 {
		if x, y := uniform(a), b.Float64(); x != y {
			t.Fatalf("draw %d: %v, want %v", i, x, y)
		}
	}
}

// TestStirlingSeries: (n − ½)·log n − n + ½·log 2π + stirlingSeries(n)
// is log Γ(n) (Abramowitz and Stegun 6.1.41; Go's math.Lgamma as the
// reference) to 1e-13 relative from n = 10 on, where the next term is
// below 1/(1680·10⁷) = 6e-11 absolute.
func TestStirlingSeries(t *testing.T) {
	for _, n := range []float64{10, 11, 17, 50, 333, 1e4, 2.5e6, 1e9} {
		got := (n-0.5)*math.Log(n) - n + halfLog2Pi + stirlingSeries(n)
		want, _ := math.Lgamma(n)
		if d := math.Abs(got - want); d > 1e-13*math.Abs(want)+1e-10 {
			t.Errorf("log Γ(%g): %.17g, want %.17g (difference %g)", n, got, want, d)
		}
	}
}

// TestPTRSAccept: ptrsAccept decides as the test of Hörmann (1993)
// written with log k! from math.Lgamma, log w ≤ −mu + k·log mu − log k!,
// for a million random (mu, k, w) around the counts PTRS draws (half of
// them small counts at means near 10, close to the edge), except
// where the two sides agree to 1e-9.
func TestPTRSAccept(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	for i := range 1_000_000 {
		mu := 10 * math.Pow(1e5, rng.Float64())
		k := math.Max(0, math.Floor(mu+5*math.Sqrt(mu)*(2*rng.Float64()-1)))
		spread := 2.0
		if i%2 == 1 {
			// the small counts of the means near 10, closer to the edge
			mu, k, spread = 10+2*rng.Float64(), math.Floor(12*rng.Float64()), 0.02
		}
		lg, _ := math.Lgamma(k + 1)
		rhs := -mu + k*math.Log(mu) - lg
		lhs := rhs + spread*(rng.Float64()-0.5)
		w := math.Exp(lhs)
		if math.Abs(math.Log(w)-rhs) < 1e-9*math.Max(1, math.Abs(rhs)) {
			continue
		}
		if got, want := ptrsAccept(mu, math.Log(mu), k, w), math.Log(w) <= rhs; got != want {
			t.Fatalf("try %d: mu %g, k %g, log w %g against %g: accepted %v, want %v", i, mu, k, math.Log(w), rhs, got, want)
		}
	}
}

// TestLogAtMost: logAtMost answers as math.Log(w) <= r (the standard
// library as the reference) for w over the whole range of normal floats,
// and at 0, subnormals, +Inf and NaN, with r close to log w (inside and
// just outside the bracket) and far from it (the bracket of method.md §26
// Poisson draws of the toys).
func TestLogAtMost(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for i := range 2_000_000 {
		w := math.Exp((2*rng.Float64() - 1) * 700)
		if i%2 == 0 {
			w = rng.Float64() * 2 // around 1, where log w is small
		}
		l := math.Log(w)
		var r float64
		switch i % 4 {
		case 0, 1:
			r = l + (rng.Float64()-0.5)*1e-3 // near the bracket's width
		case 2:
			r = l + (rng.Float64()-0.5)*1e-14*math.Max(1, math.Abs(l)) // inside it
		default:
			r = l + (rng.Float64()-0.5)*10
		}
		if got, want := logAtMost(w, r), l <= r; got != want {
			t.Fatalf("w %g, r %.17g (log w %.17g): %v, want %v", w, r, l, got, want)
		}
	}
	for _, w := range []float64{0, 5e-324, 1e-310, math.Inf(1), math.NaN(), 1, math.Sqrt2, 1 / math.Sqrt2} {
		for _, r := range []float64{-800, -1, 0, 1e-17, 1, 800} {
			if got, want := logAtMost(w, r), math.Log(w) <= r; got != want {
				t.Errorf("w %g, r %g: %v, want %v", w, r, got, want)
			}
		}
	}
}
