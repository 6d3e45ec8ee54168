package validate

import (
	"context"
	"fmt"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods"
)

// Bias is the toy-ensemble estimate of the bias of a result: toys drawn
// from the result refolded (ν = R μ̂ + b, common practice), each unfolded
// with the method at the regularisation the result chose, and per truth
// bin the mean toy estimate minus μ̂ with its standard error. It is a
// model-dependent estimate (it takes the result as the truth), not a
// correction (method.md §23).
type Bias struct {
	// Toys and Seed set the ensemble (the toys of Run, one PCG stream per
	// toy); K is the regularisation strength of the method family.
	Toys int    `json:"toys"`
	Seed uint64 `json:"seed"`
	K    int    `json:"-"`
	// Bias per truth bin and its statistical precision (one standard
	// error from the finite toy count, sqrt(variance/Toys)); 0 where not
	// determined.
	Bias  []float64 `json:"values"`
	Error []float64 `json:"error"`
}

// EstimateBias runs the bias ensemble of the result nominal of problem
// p, unfolded with the method m and the common settings s: s.BiasToys
// toys (at least 2) seeded by s.Seed, drawn from nominal's estimate
// refolded and unfolded with m at the regularisation nominal chose
// (methods.Fixed: the iterations made, or the tau chosen). progress,
// when not nil, reports the toys done. Errors are those of Run.
func EstimateBias(ctx context.Context, p *unfold.Problem, s *unfold.Settings, m unfold.Method, nominal *unfold.Result, progress func(done, total int)) (*Bias, error) {
	rs, err := s.Resolve()
	if err != nil {
		return nil, err
	}
	if rs.BiasToys < 2 {
		return nil, &unfold.SettingsError{Field: "BiasToys", Reason: "must be at least 2 for a bias estimate"}
	}
	method, K := methods.Fixed(m, nominal.Details)
	if K < 1 {
		return nil, fmt.Errorf("validate: bias: regularisation strength %d", K)
	}
	truth := make([]float64, len(nominal.Estimate))
	for j, d := range nominal.Determined {
		if d {
			truth[j] = nominal.Estimate[j]
		}
	}
	// The toys estimate the bias of the data's unfolding: each toy's
	// uncertainty is the per-bin one of Run, without response samples.
	ts := rs
	ts.ResponseSamples = 0
	e, err := Run(ctx, &Config{Problem: p, Settings: &ts, Method: method, MaxK: K, Truth: truth, Toys: rs.BiasToys, Seed: rs.Seed, Progress: progress}, 0, 0)
	if err != nil {
		return nil, err
	}
	pt := e.Scan()[K-1]
	return &Bias{Toys: rs.BiasToys, Seed: rs.Seed, K: K, Bias: pt.Bias, Error: pt.BiasError}, nil
}
