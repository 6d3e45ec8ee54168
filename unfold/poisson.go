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
// rng only: the draws depend on the stream alone, so a toy's pseudo-data
// have the same bits whatever the number of cores (method.md §26 Poisson
// draws of the toys). It is newPoissonMean(mu).rand(rng, mu).
func poissonRand(rng *rand.Rand, mu float64) float64 {
	c := newPoissonMean(mu)
	return c.rand(rng, mu)
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
	// b is PTRS's b, or e^-mu for the search; vr is PTRS's v_r.
	b, vr float64
}

// poissonMeanBytes is the size of a poissonMean, for memory estimates.
const poissonMeanBytes = 16

func newPoissonMean(mu float64) poissonMean {
	switch {
	case !(mu > 0):
		return poissonMean{}
	case mu < poissonSearchMax:
		return poissonMean{b: math.Exp(-mu)}
	}
	b := 0.931 + 2.53*math.Sqrt(mu)
	return poissonMean{b: b, vr: 0.9277 - 3.6224/(b-2)}
}

// rand returns a draw of mean mu, the mean c was formed for.
func (c *poissonMean) rand(rng *rand.Rand, mu float64) float64 {
	switch {
	case !(mu > 0):
		return 0
	case mu < poissonSearchMax:
		return c.search(rng, mu)
	}
	return c.ptrs(rng, mu)
}

// search inverts the Poisson distribution function of mean mu
// (0 < mu < poissonSearchMax) by sequential search: the smallest k with
// u < F(k) for u uniform on [0, 1). The sum of the pmf rounded in
// floating point may stay below u for u within rounding of 1; such a
// uniform, far beyond the last k that matters, is drawn again.
func (c *poissonMean) search(rng *rand.Rand, mu float64) float64 {
	p0 := c.b
	for {
		u := rng.Float64()
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
// its section 3) for mu ≥ poissonSearchMax.
func (c *poissonMean) ptrs(rng *rand.Rand, mu float64) float64 {
	b, vr := c.b, c.vr
	a := -0.059 + 0.02483*b
	// log(1/alpha) and log(mu), formed at the first try outside the
	// squeeze (about one draw in four): the squeeze needs no logarithm.
	var logAlpha, logMu float64
	logs := false
	for {
		u := rng.Float64() - 0.5
		v := rng.Float64()
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
		if !logs {
			logAlpha, logMu, logs = math.Log(1.1239+1.1328/(b-3.4)), math.Log(mu), true
		}
		lg, _ := math.Lgamma(k + 1)
		if math.Log(v)+logAlpha-math.Log(a/(us*us)+b) <= -mu+k*logMu-lg {
			return k
		}
	}
}
