package bayes

import (
	"context"

	"github.com/desmear/desmear/unfold"
)

// Name is the method's name in unfold.Result.Method and in the method
// choice of the analysis file and the command line.
const Name = "dagostini"

// Name returns the method's name.
func (s *Settings) Name() string { return Name }

// Validate checks the settings (see Resolve).
func (s *Settings) Validate() error {
	_, err := s.resolve()
	return err
}

// WithIterations returns a copy of s with a fixed number of k
// iterations (no stopping rule): the method at regularisation strength
// k, for scans of the number of iterations.
func (s *Settings) WithIterations(k int) unfold.Method {
	var c Settings
	if s != nil {
		c = *s
	}
	c.Iterations, c.StopChi2, c.MaxIterations = k, 0, 0
	return &c
}

// Scanned returns a copy of s that keeps every iteration (Scan): the
// iteration scan in one run.
func (s *Settings) Scanned() unfold.Method {
	var c Settings
	if s != nil {
		c = *s
	}
	c.Scan = true
	return &c
}

// NewRefit returns the iteration on p's current state with its work
// allocated once (an Unfolder): the unfold.Refitter of the iterative
// method, for ensembles of sampled responses.
func (s *Settings) NewRefit(p *unfold.Prepared) (func(ctx context.Context, dst []float64) error, error) {
	u, err := NewUnfolder(p, s)
	if err != nil {
		return nil, err
	}
	u.RecordLogLikelihood(false) // only the estimate is kept
	return func(ctx context.Context, dst []float64) error {
		_, err := u.Unfold(ctx, dst, nil)
		return err
	}, nil
}

// Fit runs the iteration on p. The result's Details are a *Details.
func (s *Settings) Fit(ctx context.Context, p *unfold.Prepared) (unfold.Fit, error) {
	rs, err := s.resolve()
	if err != nil {
		return nil, err
	}
	m := newModel(p)
	var sm *smoother
	if rs.Smoothing != nil {
		if sm, err = newSmoother(rs.Smoothing, m.det); err != nil {
			return nil, err
		}
	}
	it := newIterator(m, sm)
	var tan tangents
	var kept [][]float64
	if rs.Scan {
		tan = &recorder{each: func(_ int, mu []float64) { kept = append(kept, append([]float64(nil), mu...)) }}
	}
	d, err := it.run(ctx, m.n, rs, tan)
	if err != nil {
		return nil, err
	}
	return &fit{m: m, sm: sm, it: it, details: d, kept: kept,
		estimate: append([]float64(nil), it.mu...),
		folded:   append([]float64(nil), it.nu...)}, nil
}

// fit is the nominal iteration. The uncertainties re-run the iteration
// with the number of iterations it made, carrying the tangents along;
// the iteration is deterministic, so the re-run retraces it bit for bit.
type fit struct {
	m                *model
	sm               *smoother
	details          *Details
	kept             [][]float64 // the estimate of every iteration (Scan)
	estimate, folded []float64
	pr               *probes // the last batch's, reused by the next of its size
	// it is the nominal iteration's iterator, reused by the re-runs
	// (start resets it), so that batches of probes allocate no new one.
	it *iterator
}

func (f *fit) Estimate() []float64 { return f.estimate }
func (f *fit) Folded() []float64   { return f.folded }
func (f *fit) Details() any        { return f.details }

// StepEstimates returns the estimate of every iteration kept with
// Settings.Scan, the start first (unfold.Stepper); nil without.
func (f *fit) StepEstimates() [][]float64 { return f.kept }

// Jacobian carries the dense Jacobian along a re-run of the iteration.
func (f *fit) Jacobian(ctx context.Context, dst *unfold.Jacobian) error {
	jc := newJacobian(f.m, dst)
	f.it.noLL = true // the re-run's details are not kept
	if _, err := f.it.run(ctx, f.m.n, fixedIterations(f.details.Iterations), jc); err != nil {
		return err
	}
	dst.Data, dst.Work = jc.j, jc.w
	if jc.v != nil {
		dst.Covariance = jc.v
	}
	return nil
}

// Tangents carries the probes along a re-run of the iteration.
func (f *fit) Tangents(ctx context.Context, dst *unfold.Probes) error {
	blocked := f.sm == nil && !perProbe
	if f.pr == nil || f.pr.made < dst.Len() || f.pr.blocked != blocked {
		f.pr = newProbes(f.m, dst, blocked)
	} else {
		f.pr.reuse(dst) // the next batch, no larger: the same buffers
	}
	f.it.noLL = true // the re-run's details are not kept
	_, err := f.it.run(ctx, f.m.n, fixedIterations(f.details.Iterations), f.pr)
	return err
}

// NewToyRunner returns a runner iterating pseudo-data as many times as
// the nominal iteration did.
func (f *fit) NewToyRunner() unfold.ToyRunner {
	r := &toyRunner{mod: *f.m, rs: fixedIterations(f.details.Iterations)}
	r.it = newIterator(&r.mod, f.sm)
	r.it.noLL = true // a toy's details are not kept
	if f.kept != nil {
		r.rec = &recorder{}
		return &stepToyRunner{r}
	}
	return r
}

type toyRunner struct {
	mod model
	it  *iterator
	rs  *resolved
	d   Details
	rec *recorder // reports the steps (stepToyRunner)
}

func (r *toyRunner) Run(ctx context.Context, n, b []float64) ([]float64, error) {
	if b != nil {
		r.mod.b = b
	}
	if err := r.it.iterate(ctx, n, r.rs, nil, &r.d); err != nil {
		return nil, err
	}
	return r.it.mu, nil
}

// DetailsOf returns the iteration details of a result of this method,
// or an empty Details when r came from another method.
func DetailsOf(r *unfold.Result) *Details {
	if d, ok := r.Details.(*Details); ok {
		return d
	}
	return &Details{}
}
