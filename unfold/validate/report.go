package validate

import (
	"context"
	"fmt"
	"slices"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// Options are the choices of a validation (see Validate).
type Options struct {
	// Method returns the method at regularisation strength k (the scan);
	// Nominal is the method as the analysis sets it (closure and stress
	// tests, and the nominal result).
	Method  func(k int) unfold.Method
	Nominal unfold.Method
	// MaxK, Toys and Seed set the toy ensemble (see Config).
	MaxK int
	Toys int
	Seed uint64
	// Truth is the truth of the toys; nil means the generated spectrum
	// scaled to the data (ScaledGenerated), or with TruthFromResult the
	// nominal result (the estimate of the data with the Nominal method:
	// the toys are its refold). TruthSource names it in the report
	// ("generated" or "result" when Truth is nil).
	Truth           []float64
	TruthSource     string
	TruthFromResult bool
	// Tilts, when TiltScheme is not nil, adds one stress test per axis of
	// the scheme: a linear tilt of TiltPercent (Tilt). Weights adds
	// stress tests of given weights per truth bin, by name.
	TiltScheme  *binning.Scheme
	TiltPercent float64
	Weights     []NamedWeights
	// Criterion chooses the recommendation (zero: MinMSE), with
	// Threshold for BiasBelow.
	Criterion Criterion
	Threshold float64
	// Progress, when not nil, reports the toys done (see Config).
	Progress func(done, total int)
}

// NamedWeights are the weights of a stress test.
type NamedWeights struct {
	Name    string
	Weights []float64
}

// DefaultTiltPercent is the size of the built-in linear tilts.
const DefaultTiltPercent = 20

// Report is everything a validation found.
type Report struct {
	Method      string    `json:"method"`
	Toys        int       `json:"toys"`
	MaxK        int       `json:"max_iterations"`
	Seed        uint64    `json:"seed"`
	TruthSource string    `json:"truth_source"`
	Truth       []float64 `json:"truth"`
	Determined  []bool    `json:"determined"`
	// Labels name the truth bins (empty without a truth binning).
	Labels []string `json:"labels,omitempty"`
	Scan   []Point  `json:"scan"`
	// Recommended is the k the criterion chooses; Recommendation the
	// criterion with its curve.
	Recommended    int             `json:"recommended_iterations"`
	Recommendation *Recommendation `json:"recommendation"`
	Closure        []*Check        `json:"closure"`
	Stress         []*Check        `json:"stress"`
	// Nominal is the nominal result (the data unfolded with the nominal
	// method) that the stress tests are compared with.
	Nominal *Nominal `json:"nominal"`
}

// Nominal is the estimate of the data and its per-bin uncertainty.
type Nominal struct {
	Estimate    []float64 `json:"estimate"`
	Uncertainty []float64 `json:"uncertainty"`
}

// ScaledGenerated returns the generated spectrum G of p scaled so that
// its fold matches the data: G · Σ(n − b) / Σ_j eps_j G_j, 0 where not
// determined.
func ScaledGenerated(p *unfold.Problem) ([]float64, error) {
	w := make([]float64, len(p.Generated))
	for j := range w {
		w[j] = 1
	}
	return Reweighted(p, w)
}

// Validate runs the toy ensemble of o, the closure tests (exact and
// fluctuated), the stress tests and the recommendation on problem p
// with the common settings s. It is NewSetup, Run over every toy and
// Setup.Report.
func Validate(ctx context.Context, p *unfold.Problem, s *unfold.Settings, o *Options) (*Report, error) {
	st, err := NewSetup(ctx, p, s, o)
	if err != nil {
		return nil, err
	}
	e, err := Run(ctx, &st.Config, 0, 0)
	if err != nil {
		return nil, err
	}
	return st.Report(ctx, e)
}

// Setup is a validation before its toys: the nominal result and the
// configuration of the toy ensemble (Config, with the toys' truth
// resolved). Its toys may be run in parts, in one process or in
// several (Run with a range of toys; Merge), and Report completes the
// validation from their ensemble.
type Setup struct {
	// Config is the toy ensemble; Run(ctx, &Config, first, count) runs
	// a part of it.
	Config Config

	p       *unfold.Problem
	s       *unfold.Settings
	o       *Options
	nominal *unfold.Result
	src     string
}

// NewSetup unfolds the data with the nominal method and resolves the
// toys' truth of o.
func NewSetup(ctx context.Context, p *unfold.Problem, s *unfold.Settings, o *Options) (*Setup, error) {
	ns, err := s.Resolve()
	if err != nil {
		return nil, err
	}
	ns.Covariance, ns.DiagonalMethod = unfold.Diagonal, unfold.DiagonalAuto
	nominal, err := unfold.Unfold(ctx, p, &ns, o.Nominal)
	if err != nil {
		return nil, err
	}
	truth, src := o.Truth, o.TruthSource
	switch {
	case truth != nil:
	case o.TruthFromResult:
		truth, src = make([]float64, len(nominal.Estimate)), "result"
		for j, d := range nominal.Determined {
			if d {
				truth[j] = nominal.Estimate[j]
			}
		}
	default:
		if truth, err = ScaledGenerated(p); err != nil {
			return nil, err
		}
		src = "generated"
	}
	c := Config{Problem: p, Settings: s, Method: o.Method, MaxK: o.MaxK, Truth: truth, Toys: o.Toys, Seed: o.Seed, Progress: o.Progress}
	return &Setup{Config: c, p: p, s: s, o: o, nominal: nominal, src: src}, nil
}

// Report completes the validation from e, the ensemble of every toy of
// the setup (one Run, or parts merged with Merge): the scan, the
// recommendation, the closure and the stress tests. It is an error if e
// is not the whole ensemble of this setup.
func (st *Setup) Report(ctx context.Context, e *Ensemble) (*Report, error) {
	o, p, s, c := st.o, st.p, st.s, &st.Config
	if e.MaxK != c.MaxK || e.Seed != c.Seed || !slices.Equal(e.Truth, c.Truth) {
		return nil, fmt.Errorf("validate: the toys come from another configuration (truth, seed or regularisation range differ)")
	}
	if err := e.complete(c.Toys); err != nil {
		return nil, err
	}
	r := &Report{Method: o.Nominal.Name(), Toys: o.Toys, MaxK: o.MaxK, Seed: o.Seed, TruthSource: st.src, Truth: c.Truth, Determined: e.Det, Scan: e.Scan(),
		Nominal: &Nominal{Estimate: st.nominal.Estimate, Uncertainty: st.nominal.Uncertainty}}
	crit := o.Criterion
	if crit == "" {
		crit = MinMSE
	}
	var err error
	if r.Recommendation, err = Recommend(r.Scan, crit, o.Threshold); err != nil {
		return nil, err
	}
	r.Recommended = r.Recommendation.K
	for _, fl := range []bool{false, true} {
		ch, err := Closure(ctx, p, s, o.Nominal, fl, o.Seed)
		if err != nil {
			return nil, err
		}
		r.Closure = append(r.Closure, ch)
	}
	tests := append([]NamedWeights(nil), o.Weights...)
	if o.TiltScheme != nil {
		pct := o.TiltPercent
		if pct == 0 {
			pct = DefaultTiltPercent
		}
		for _, ax := range o.TiltScheme.AxisNames() {
			w, err := Tilt(o.TiltScheme, ax, pct)
			if err != nil {
				return nil, err
			}
			tests = append(tests, NamedWeights{Name: fmt.Sprintf("tilt-%s-%+g%%", ax, pct), Weights: w})
		}
	}
	for _, t := range tests {
		ch, err := Stress(ctx, p, s, o.Nominal, t.Name, t.Weights, st.nominal)
		if err != nil {
			return nil, err
		}
		r.Stress = append(r.Stress, ch)
	}
	return r, nil
}

// Defaults of the automatic choice (Choose) and of a validation's
// command line.
const (
	// DefaultToys is the number of toys.
	DefaultToys = 500
	// DefaultMaxK is the largest regularisation strength scanned.
	DefaultMaxK = 10
)

// Choice records an automatic choice of the regularisation strength (the
// number of iterations): K, chosen by Criterion over 1..MaxIterations on
// Toys toys of seed Seed, with the criterion's value per strength.
type Choice struct {
	K             int       `json:"-"`
	Criterion     Criterion `json:"criterion"`
	Toys          int       `json:"toys"`
	MaxIterations int       `json:"max_iterations"`
	Seed          uint64    `json:"seed"`
	Curve         []float64 `json:"curve"`
}

// Choose runs the toy ensemble of a validation alone, with DefaultToys
// toys drawn from the generated spectrum scaled to the data, over
// 1..DefaultMaxK, and returns the strength the MinMSE criterion
// chooses: the automatic choice of the number of iterations.
func Choose(ctx context.Context, p *unfold.Problem, s *unfold.Settings, method func(k int) unfold.Method, seed uint64, progress func(done, total int)) (*Choice, error) {
	truth, err := ScaledGenerated(p)
	if err != nil {
		return nil, err
	}
	e, err := Run(ctx, &Config{Problem: p, Settings: s, Method: method, MaxK: DefaultMaxK, Truth: truth, Toys: DefaultToys, Seed: seed, Progress: progress}, 0, 0)
	if err != nil {
		return nil, err
	}
	rec, err := Recommend(e.Scan(), MinMSE, 0)
	if err != nil {
		return nil, err
	}
	return &Choice{K: rec.K, Criterion: rec.Criterion, Toys: DefaultToys, MaxIterations: DefaultMaxK, Seed: seed, Curve: rec.Curve}, nil
}
