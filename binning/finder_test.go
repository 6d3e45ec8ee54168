package binning

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// The arithmetic path of finder for edges of equal widths (method.md §27
// Locating events by arithmetic) must give the edge search's bin (search,
// the reference: the rule "a bin includes its low edge, the last edge
// belongs to the overflow", common practice) for every value: on every edge and the floats just below and above it,
// midpoints, random values, values far outside, ±Inf. Edge lists cover
// exact and rounded equal widths (lo + i*w, i/n, decimal strings), widths
// perturbed by up to a third of a bin (still arithmetic) and by more
// (the table), offsets large against the width, tiny and huge widths,
// ranges across zero and many bins.
func TestFinderEqualWidths(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	type list struct {
		name       string
		edges      []float64
		arithmetic bool // the arithmetic path must be taken
	}
	var lists []list
	add := func(name string, e []float64, arith bool) { lists = append(lists, list{name, e, arith}) }
	for _, n := range []int{1, 2, 3, 7, 48, 98, 100, 1000, 100000} {
		add(fmt.Sprintf("uniform %d", n), uniformEdges(n, 0, 1), true)
		add(fmt.Sprintf("across zero %d", n), uniformEdges(n, -2.5, 7.25), true)
		div := make([]float64, n+1)
		dec := make([]float64, n+1)
		for i := range div {
			div[i] = float64(i) / float64(n)
			dec[i], _ = strconv.ParseFloat(strconv.FormatFloat(0.1*float64(i)-3, 'f', 3, 64), 64)
		}
		add(fmt.Sprintf("i/n %d", n), div, true)
		add(fmt.Sprintf("decimals %d", n), dec, true)
	}
	for _, c := range []struct {
		lo, w float64
		n     int
		arith bool
	}{{1e15, 0.5, 50, true}, {-1e12, 1e-4, 100, true}, {1e-300, 1e-302, 30, true}, {-1e300, 1e297, 100, true},
		// n/(last-first) overflows: the table
		{0, 5e-324, 8, false}} {
		e := make([]float64, c.n+1)
		for i := range e {
			e[i] = c.lo + float64(i)*c.w
		}
		if checkEdges(e) == nil {
			add(fmt.Sprintf("lo %g w %g", c.lo, c.w), e, c.arith)
		}
	}
	for r := range 40 {
		n := 1 + rng.IntN(200)
		e := uniformEdges(n, -rng.Float64(), 1+rng.Float64())
		w := e[1] - e[0]
		small, big := append([]float64(nil), e...), append([]float64(nil), e...)
		for i := 1; i < n; i++ {
			small[i] += (rng.Float64() - 0.5) * 0.6 * w
		}
		if n >= 2 {
			big[n/2] = e[n/2] - 0.6*w // more than half a bin off: the table
			add(fmt.Sprintf("perturbed %d by more", r), big, false)
		}
		add(fmt.Sprintf("perturbed %d by a third", r), small, true)
	}
	for _, l := range lists {
		e := l.edges
		if err := checkEdges(e); err != nil {
			t.Fatalf("%s: %v", l.name, err)
		}
		f := newFinder(e)
		if l.arithmetic && f.lut != nil {
			t.Errorf("%s: equal widths not recognised", l.name)
		}
		if !l.arithmetic && f.lut == nil {
			t.Errorf("%s: uneven edges taken for equal widths", l.name)
		}
		try := func(x float64) {
			if got, want := f.find(x), search(e, x); got != want {
				t.Fatalf("%s: find(%v) = %d, the edge search gives %d", l.name, x, got, want)
			}
		}
		inf := math.Inf(1)
		for i, v := range e {
			try(v)
			try(math.Nextafter(v, inf))
			try(math.Nextafter(v, -inf))
			try(math.Nextafter(math.Nextafter(v, -inf), -inf))
			if i > 0 {
				try(e[i-1] + (v-e[i-1])/2)
			}
		}
		try(inf)
		try(-inf)
		try(math.MaxFloat64)
		try(-math.MaxFloat64)
		try(math.Copysign(0, -1))
		lo, hi := e[0], e[len(e)-1]
		for range 2000 {
			try(lo + (hi-lo)*rng.Float64())
			try(lo + (hi-lo)*(rng.Float64()*1.2-0.1))
		}
	}
}
