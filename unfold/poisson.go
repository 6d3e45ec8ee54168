package unfold

import (
	"math"
	"math/rand/v2"
)

// poissonSearchMax is the mean below which the draws invert the
// distribution function by sequential search; from it on they use the
// transformed rejection PTRS, whose constants Hörmann gives for means of
// 10 and more (method.md §26).
const poissonSearchMax = 10

// poissonRand returns a draw from the Poisson distribution of mean mu
// (mu ≥ 0; 0 for mu ≤ 0 or NaN, without drawing), using the uniforms of
// src only: the draws depend on the stream alone, so a toy's pseudo-data
// have the same bits whatever the number of cores (method.md §26 Poisson
// draws of the toys). It is newPoissonMean(mu).rand(src, mu).
func poissonRand(src *rand.PCG, mu float64) float64 {
	c := newPoissonMean(mu)
	return c.rand(src, mu)
}

// uniform returns a uniform on [0, 1) from the next output of src, the
// value math/rand/v2's Rand.Float64 forms from it (the low 53 bits
// times 2^-53), without the call through the Source interface.
func uniform(src *rand.PCG) float64 {
	return float64(src.Uint64()<<11>>11) / (1 << 53)
}

// poissonMean holds the constants of the draws of one mean that need
// more than a multiplication, formed once for the many toys that draw
// from it.
//
// Below poissonSearchMax the draw inverts the distribution function by
// sequential search from 0 (one uniform, about mu+1 steps); from it on it
// is the PTRS transformed rejection with squeeze of W. Hörmann, "The
// transformed rejection method for generating Poisson random variables",
// Insurance: Mathematics and Economics 12 (1993) 39–45 (two uniforms per
// try, about 1.1 tries, logarithms and log-gamma only outside the
// squeeze).
type poissonMean struct {
	// b is PTRS's b, or e^-mu for the search; vr is PTRS's v_r; lmu is
	// log mu for PTRS's test outside the squeeze.
	b, vr, lmu float64
}

// poissonMeanBytes is the size of a poissonMean, for memory estimates.
const poissonMeanBytes = 24

func newPoissonMean(mu float64) poissonMean {
	switch {
	case !(mu > 0):
		return poissonMean{}
	case mu < poissonSearchMax:
		return poissonMean{b: math.Exp(-mu)}
	}
	b := 0.931 + 2.53*math.Sqrt(mu)
	return poissonMean{b: b, vr: 0.9277 - 3.6224/(b-2), lmu: math.Log(mu)}
}

// rand returns a draw of mean mu, the mean c was formed for.
func (c *poissonMean) rand(src *rand.PCG, mu float64) float64 {
	switch {
	case !(mu > 0):
		return 0
	case mu < poissonSearchMax:
		return c.search(src, mu)
	}
	return c.ptrs(src, mu)
}

// search inverts the Poisson distribution function of mean mu
// (0 < mu < poissonSearchMax) by sequential search: the smallest k with
// u < F(k) for u uniform on [0, 1). The sum of the pmf rounded in
// floating point may stay below u for u within rounding of 1; such a
// uniform, far beyond the last k that matters, is drawn again.
func (c *poissonMean) search(src *rand.PCG, mu float64) float64 {
	p0 := c.b
	for {
		u := uniform(src)
		p, f := p0, p0
		for k := 0; k < 100; k++ { // P(X ≥ 100) < 1e-60 for mu < 10
			if u < f {
				return float64(k)
			}
			p *= mu / float64(k+1)
			f += p
		}
	}
}

// ptrs is Hörmann's PTRS (1993, Algorithm PTRS with the constants of
// its section 3) for mu ≥ poissonSearchMax; ptrsAccept is its test
// outside the squeeze (method.md §26).
func (c *poissonMean) ptrs(src *rand.PCG, mu float64) float64 {
	b, vr := c.b, c.vr
	a := -0.059 + 0.02483*b
	for {
		u := uniform(src) - 0.5
		v := uniform(src)
		us := 0.5 - math.Abs(u)
		if us <= 0 {
			continue // u = -0.5 gives an infinite k
		}
		k := math.Floor((2*a/us+b)*u + mu + 0.43)
		if us >= 0.07 && v <= vr {
			return k
		}
		if k < 0 || (us < 0.013 && v > us) {
			continue
		}
		if ptrsAccept(mu, c.lmu, k, v*(1.1239+1.1328/(b-3.4))/(a/(us*us)+b)) {
			return k
		}
	}
}

// ptrsAccept is PTRS's test outside the squeeze for the count k ≥ 0 and
// w = V/(α(a/u_s² + b)), with lmu = log mu: log w ≤ −mu + k·lmu − log k!.
// Below logFactorialLen, log k! comes from the table logFactorial and the
// test takes one logarithm; from there on, log k! is Stirling's series to
// 1/(1260 n⁵), n = k+1, and the test reads log(w·sqrt(n)) ≤ k·log(mu/n)
// + n − mu − ½log 2π − S(n): two logarithms.
func ptrsAccept(mu, lmu, k, w float64) bool {
	if k < logFactorialLen {
		return logAtMost(w, -mu+k*lmu-logFactorial[int(k)])
	}
	n := k + 1
	return math.Log(w*math.Sqrt(n)) <= k*math.Log(mu/n)+(n-mu)-halfLog2Pi-stirlingSeries(n)
}

// logAtMost reports whether math.Log(w) ≤ r, for w ≥ 0, mostly without
// the logarithm: w = 2^e·m with m in [1, 2), and log m = 2·(t + t³/3 +
// t⁵/5 + …) with t = (m−1)/(m+1) in [0, 1/3) (the series of artanh;
// Abramowitz and Stegun 4.1.27). The first three terms leave a remainder
// of at most 2t⁷/(7(1−t²)) ≤ (9/28)·t⁷ < 0.3215·t⁷, so log w lies within
// that, widened by logSlack for the rounding, of e·log 2 + 2(t + t³/3 +
// t⁵/5); only when r falls inside that interval is the logarithm taken.
// The answer is the one math.Log gives (whose error is below one unit in
// the last place, far inside logSlack). No branch depends on m.
func logAtMost(w, r float64) bool {
	if !(w >= 0x1p-1022) || w > math.MaxFloat64 {
		return math.Log(w) <= r // 0, subnormal, infinite or NaN: the exact test
	}
	bits := math.Float64bits(w)
	e := int(bits>>52) - 1023
	m := math.Float64frombits(bits&(1<<52-1) | 1023<<52) // in [1, 2)
	t := (m - 1) / (m + 1)
	t2 := t * t
	mid := float64(e)*math.Ln2 + 2*t*(1+t2*(1.0/3+t2*(1.0/5)))
	rem := 0.3215*t*t2*t2*t2 + logSlack*(1+math.Abs(mid))
	switch {
	case mid+rem <= r:
		return true
	case mid-rem > r:
		return false
	}
	return math.Log(w) <= r
}

// logSlack bounds, relative to max(1, |log w|), the rounding of the
// bracket of logAtMost (a few units in the last place; 1e-12 leaves a
// wide margin).
const logSlack = 1e-12

// logFactorialLen is the length of logFactorial: the counts of the means
// the toys meet most (up to a few hundred) lie well below it, and the
// table (16 KiB) stays in the cache.
const logFactorialLen = 2048

// logFactorial holds log k! = log Γ(k+1) for k < logFactorialLen, from
// math.Lgamma.
var logFactorial = func() *[logFactorialLen]float64 {
	var t [logFactorialLen]float64
	for k := range t {
		t[k], _ = math.Lgamma(float64(k) + 1)
	}
	return &t
}()

// halfLog2Pi is log(2π)/2.
const halfLog2Pi = 0.91893853320467274178

// stirlingSeries returns 1/(12n) − 1/(360n³) + 1/(1260n⁵), the terms of
// Stirling's series of log Γ(n) after (n − ½)·log n − n + ½·log 2π
// (Abramowitz and Stegun 6.1.41); the next term is below 1/(1680n⁷).
func stirlingSeries(n float64) float64 {
	r := 1 / n
	r2 := r * r
	return r * (1.0/12 - r2*(1.0/360-r2*(1.0/1260)))
}
