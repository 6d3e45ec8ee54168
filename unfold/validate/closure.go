package validate

import (
	"context"
	"fmt"
	"math"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// closureStream is the PCG stream of the fluctuated closure test (below
// the toys' streams).
const closureStream = toyStream - 1

// Check is the outcome of unfolding one pseudo-data set of known truth:
// per truth bin the truth, the estimate, its linearised uncertainty and
// the pull (estimate − truth)/uncertainty (0 where the uncertainty is 0
// or the bin is not determined), with the largest |pull| and the
// chi-square Σ pull² over the NDF bins with an uncertainty (the
// diagonal only: neighbouring bins are correlated, so it is a guide,
// not a goodness-of-fit test).
type Check struct {
	Name        string    `json:"name"`
	Fluctuated  bool      `json:"fluctuated"`
	Truth       []float64 `json:"truth"`
	Estimate    []float64 `json:"estimate"`
	Uncertainty []float64 `json:"uncertainty"`
	Bias        []float64 `json:"bias"`
	Pull        []float64 `json:"pull"`
	MaxPull     float64   `json:"max_pull"`
	MaxPullBin  int       `json:"max_pull_bin"`
	// MaxRelDeviation is the largest |estimate − truth|/truth over the
	// determined bins with truth > 0.
	MaxRelDeviation float64 `json:"max_rel_deviation"`
	Chi2            float64 `json:"chi2"`
	NDF             int     `json:"ndf"`
	// Nominal compares the estimate with the nominal result (stress
	// tests): (estimate − nominal)/nominal uncertainty per bin.
	Nominal *Comparison `json:"nominal,omitempty"`
}

// Comparison is an estimate against a reference with its uncertainty.
type Comparison struct {
	Difference []float64 `json:"difference"`
	Pull       []float64 `json:"pull"`
	Chi2       float64   `json:"chi2"`
	NDF        int       `json:"ndf"`
}

// compare compares est with ref through unfold.Compare on the diagonal
// of the squared uncertainties sigma (the pseudo-inverse of method.md
// §19: the plain sum of squared pulls over the bins with an
// uncertainty, NDF their number); pulls are 0 where there is none.
func compare(est, ref, sigma []float64, det []bool) (*Comparison, error) {
	c := &Comparison{Difference: make([]float64, len(est)), Pull: make([]float64, len(est))}
	uc, err := unfold.Compare(ref, est, sigma, nil, det, nil, 0)
	if err != nil {
		return nil, err
	}
	for _, r := range uc.Rows {
		if !r.Determined {
			continue
		}
		c.Difference[r.Bin] = r.Estimate - r.Reference
		if !math.IsNaN(r.Pull) {
			c.Pull[r.Bin] = r.Pull
		}
	}
	c.Chi2, c.NDF = uc.Chi2, uc.NDF
	return c, nil
}

// unfoldKnown unfolds data (with the problem's background, prior and
// settings, uncertainties on the per-bin diagonal) and compares the
// estimate with truth.
func unfoldKnown(ctx context.Context, p *unfold.Problem, s *unfold.Settings, m unfold.Method, name string, data, truth []float64, fluct bool) (*Check, *unfold.Result, error) {
	rs, err := s.Resolve()
	if err != nil {
		return nil, nil, err
	}
	rs.Covariance = unfold.Diagonal
	if rs.DiagonalMethod == unfold.DiagonalToys || rs.DiagonalMethod == unfold.DiagonalGamma {
		rs.DiagonalMethod = unfold.DiagonalAuto
	}
	// The checks concern the data's statistics; the response is the
	// nominal one in every unfolding, so it is not sampled.
	rs.ResponseSamples = 0
	q := *p
	q.Data, q.DataVariance = data, nil
	res, err := unfold.Unfold(ctx, &q, &rs, m)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", name, err)
	}
	cmp, err := compare(res.Estimate, truth, res.Uncertainty, res.Determined)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", name, err)
	}
	c := &Check{Name: name, Fluctuated: fluct, Truth: truth, Estimate: res.Estimate, Uncertainty: res.Uncertainty,
		Bias: cmp.Difference, Pull: cmp.Pull, Chi2: cmp.Chi2, NDF: cmp.NDF, MaxPullBin: -1}
	for j, x := range cmp.Pull {
		if a := math.Abs(x); a > c.MaxPull || c.MaxPullBin < 0 && res.Determined[j] {
			c.MaxPull, c.MaxPullBin = a, j
		}
		if t := truth[j]; res.Determined[j] && t > 0 {
			c.MaxRelDeviation = max(c.MaxRelDeviation, math.Abs(cmp.Difference[j])/t)
		}
	}
	return c, res, nil
}

// Closure unfolds the simulation's own reco spectrum: ν = A·1 + b, the
// migrations summed over the truth bins plus the background, whose truth
// is the generated spectrum G. Without fluctuations the data are ν and
// the truth G; with the simulation's prior the iteration then starts at
// its fixed point and returns G to rounding (method.md §7 Exact
// properties of the iteration). With fluctuate, ν and G are scaled to
// the data's statistics (Σ(n − b)) and the data are one Poisson draw of
// ν from seed: the pulls should then be of unit width.
func Closure(ctx context.Context, p *unfold.Problem, s *unfold.Settings, m unfold.Method, fluctuate bool, seed uint64) (*Check, error) {
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		return nil, err
	}
	nr := pr.RecoBins()
	sim := make([]float64, nr)
	pr.Migrations().RowSums(sim)
	truth := make([]float64, pr.TruthBins())
	for j, d := range pr.Determined() {
		if d {
			truth[j] = p.Generated[j]
		}
	}
	name := "closure"
	if fluctuate {
		name = "closure-fluctuated"
		var ss float64
		for _, x := range sim {
			ss += x
		}
		f := pr.Net() / ss
		for i := range sim {
			sim[i] *= f
		}
		for j := range truth {
			truth[j] *= f
		}
	}
	nu := append([]float64(nil), sim...)
	for i, b := range p.Background {
		nu[i] += b
	}
	data := nu
	if fluctuate {
		data = make([]float64, nr)
		poisson(data, nu, seed, closureStream)
	}
	c, _, err := unfoldKnown(ctx, p, s, m, name, data, truth, fluctuate)
	return c, err
}

// Stress reweights the simulated truth by w (one factor per truth bin),
// scales it to the data's statistics, folds it through the nominal
// response (plus the background), unfolds the result without
// fluctuations with the nominal prior and compares the estimate with
// the reweighted truth and, when nominal is not nil, with the nominal
// result (its estimate and uncertainty).
func Stress(ctx context.Context, p *unfold.Problem, s *unfold.Settings, m unfold.Method, name string, w []float64, nominal *unfold.Result) (*Check, error) {
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		return nil, err
	}
	truth, err := reweighted(pr, p.Generated, w)
	if err != nil {
		return nil, fmt.Errorf("validate: stress test %s: %w", name, err)
	}
	data := expected(pr, p.Background, truth)
	c, _, err := unfoldKnown(ctx, p, s, m, name, data, truth, false)
	if err != nil {
		return nil, err
	}
	if nominal != nil && nominal.Uncertainty != nil {
		if c.Nominal, err = compare(c.Estimate, nominal.Estimate, nominal.Uncertainty, nominal.Determined); err != nil {
			return nil, fmt.Errorf("validate: stress test %s: %w", name, err)
		}
	}
	return c, nil
}

// Tilt returns the weights of a linear tilt along axis of the scheme:
// w = 1 + (percent/100)·(2(x − lo)/(hi − lo) − 1), with x the bin's
// centre along the axis and lo, hi the smallest and largest in-range
// edge of the axis over the scheme, so that w runs from 1 − percent/100
// to 1 + percent/100 across the axis. Flow bins take the weight of the
// nearest edge; bins of regions without the axis weigh 1. percent must
// lie in (−100, 100).
func Tilt(scheme *binning.Scheme, axis string, percent float64) ([]float64, error) {
	if scheme.AxisIndex(axis) < 0 {
		return nil, fmt.Errorf("validate: the truth binning has no axis %q", axis)
	}
	if !(math.Abs(percent) < 100) {
		return nil, fmt.Errorf("validate: a tilt of %v%% would make weights negative; give a size below 100%%", percent)
	}
	c := axisCentres(scheme, axis)
	if !(c.hi > c.lo) {
		return nil, fmt.Errorf("validate: axis %q has no in-range width", axis)
	}
	w := make([]float64, len(c.x))
	for g, x := range c.x {
		w[g] = 1
		if c.has[g] {
			w[g] = 1 + percent/100*(2*(x-c.lo)/(c.hi-c.lo)-1)
		}
	}
	return w, nil
}
