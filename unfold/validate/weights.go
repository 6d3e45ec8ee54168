package validate

import (
	"fmt"
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/inputs/observable"
)

// centres are the bin centres of the bins of a scheme along one axis:
// x[g] the centre of bin g, clamped to [lo, hi], the smallest and
// largest in-range edge of the axis over the scheme (flow bins take the
// nearest edge); has[g] is false for bins of regions without the axis
// and for flow bins summing over the whole axis.
type centres struct {
	x      []float64
	has    []bool
	lo, hi float64
}

func axisCentres(scheme *binning.Scheme, axis string) centres {
	n := scheme.Len()
	c := centres{x: make([]float64, n), has: make([]bool, n), lo: math.Inf(1), hi: math.Inf(-1)}
	for g := range n {
		b := scheme.Bin(g)
		for k, name := range b.Axes {
			if name != axis {
				continue
			}
			l, h := b.Low[k], b.High[k]
			switch {
			case math.IsInf(l, -1) && math.IsInf(h, 1):
				continue
			case math.IsInf(l, -1):
				c.x[g] = math.Inf(-1)
			case math.IsInf(h, 1):
				c.x[g] = math.Inf(1)
			default:
				c.x[g] = (l + h) / 2
				if g < scheme.InRange() {
					c.lo, c.hi = min(c.lo, l), max(c.hi, h)
				}
			}
			c.has[g] = true
		}
	}
	for g, x := range c.x {
		if c.has[g] {
			c.x[g] = min(max(x, c.lo), c.hi)
		}
	}
	return c
}

// Weights evaluates the weight expression x, compiled over the axis
// names of the truth scheme (scheme.AxisNames(), in that order), at the
// centre of every truth bin (flow bins at the nearest in-range edge):
// the weights of a stress test or of a reweighted toy truth. Bins of
// regions lacking an axis the expression uses weigh 1. A weight that is
// negative or not finite is an error naming the bin.
func Weights(scheme *binning.Scheme, x *observable.Expr) ([]float64, error) {
	names := scheme.AxisNames()
	cs := make([]centres, len(names))
	for _, k := range x.Columns() {
		cs[k] = axisCentres(scheme, names[k])
	}
	row := make([]float64, len(names))
	w := make([]float64, scheme.Len())
	for g := range w {
		w[g] = 1
		ok := true
		for _, k := range x.Columns() {
			if !cs[k].has[g] {
				ok = false
				break
			}
			row[k] = cs[k].x[g]
		}
		if !ok {
			continue
		}
		v := x.EvalRow(row)
		if !(v >= 0) || math.IsInf(v, 0) {
			return nil, fmt.Errorf("validate: the weight %q is %v at truth bin %d (%s): give an expression that is finite and ≥ 0 over the truth binning", x.String(), v, g, scheme.Label(g))
		}
		w[g] = v
	}
	return w, nil
}

// Reweighted returns the generated spectrum of p reweighted by w (one
// factor per truth bin) and scaled so that its fold matches the data,
// Σ(n − b): the truth of a stress test, or a reweighted toy truth. 0
// where not determined.
func Reweighted(p *unfold.Problem, w []float64) ([]float64, error) {
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		return nil, err
	}
	t, err := reweighted(pr, p.Generated, w)
	if err != nil {
		return nil, fmt.Errorf("validate: %w", err)
	}
	return t, nil
}

func reweighted(pr *unfold.Prepared, gen, w []float64) ([]float64, error) {
	nt := pr.TruthBins()
	if len(w) != nt {
		return nil, fmt.Errorf("%d weights, want one per truth bin (%d)", len(w), nt)
	}
	truth := make([]float64, nt)
	var sum float64
	for j, d := range pr.Determined() {
		if !d {
			continue
		}
		if !(w[j] >= 0) || math.IsInf(w[j], 0) {
			return nil, fmt.Errorf("weight %v of truth bin %d is not a finite number ≥ 0", w[j], j)
		}
		truth[j] = gen[j] * w[j]
		sum += pr.Efficiency()[j] * truth[j]
	}
	if !(sum > 0) {
		return nil, fmt.Errorf("the reweighted truth folds to nothing")
	}
	f := pr.Net() / sum
	if !(f > 0) {
		return nil, fmt.Errorf("the data minus the background sum to %v ≤ 0: there is no statistics to scale the truth to", pr.Net())
	}
	for j := range truth {
		truth[j] *= f
	}
	return truth, nil
}
