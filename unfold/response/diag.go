package response

import (
	"math"

	"github.com/desmear/desmear/binning"
)

// diagMap locates reco observables in the truth scheme (for purity and
// stability). direct[r] is the truth bin that contains all of reco bin
// r, or -1 when r straddles truth bins, is a flow bin or the schemes are
// not both *binning.Scheme (then the event is located).
type diagMap struct {
	truth  Locator
	axes   []int // per truth axis, the reco observable index
	direct []int32
}

func newDiagMap(truth, reco Locator, axes []int) *diagMap {
	m := &diagMap{truth: truth, axes: axes, direct: make([]int32, reco.Len())}
	for i := range m.direct {
		m.direct[i] = -1
	}
	ts, ok1 := truth.(*binning.Scheme)
	rs, ok2 := reco.(*binning.Scheme)
	// With several truth regions a reco bin whose corners fall in one
	// truth bin could still overlap an earlier region inside: locate.
	if !ok1 || !ok2 || len(ts.Regions()) != 1 || len(axes) > 16 {
		return m
	}
	names := rs.AxisNames()
	lo, hi := make([]float64, len(axes)), make([]float64, len(axes))
	corner := make([]float64, len(axes))
	for r := range m.direct {
		bin := rs.Bin(r)
		if bin.Flow {
			continue
		}
		ok := true
		for a, ax := range axes {
			k := -1
			for i, n := range bin.Axes {
				if n == names[ax] {
					k = i
				}
			}
			if k < 0 {
				ok = false
				break
			}
			lo[a], hi[a] = bin.Low[k], math.Nextafter(bin.High[k], math.Inf(-1))
		}
		if !ok {
			continue
		}
		// Truth bins are boxes: the reco box lies in one of them when
		// all its corners do (the upper edges are excluded, hence the
		// largest value below each upper edge).
		g := -2
		for c := 0; c < 1<<len(axes) && ok; c++ {
			for a := range axes {
				if c&(1<<a) != 0 {
					corner[a] = hi[a]
				} else {
					corner[a] = lo[a]
				}
			}
			t := ts.Locate(corner)
			if t < 0 || (g != -2 && t != g) {
				ok = false
			}
			g = t
		}
		if ok {
			m.direct[r] = int32(g)
		}
	}
	return m
}
