package unfold

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// plan is the uncertainty computation chosen for a problem.
type plan struct {
	m      *Prepared
	rs     *Settings
	method CovarianceMode
	diag   DiagonalMethod // resolved: DiagonalExact, DiagonalProbes, DiagonalToys or DiagonalGamma
	batch  int            // probes per batch
	// toyWorkers bounds the toys run at once (their memory within half
	// the limit).
	toyWorkers int
	// toyBlocks reports that a block of toys (toyBlockBytes) fits within
	// half the limit.
	toyBlocks bool
}

// FullCovarianceBytes returns the memory estimate of the full covariance
// of p under s (the dense Jacobian, two buffers, and the covariance
// matrix: 16 bytes per truth bin and Jacobian column plus 8 per pair of
// truth bins, and 8·n_t·(n_t − columns) more with fewer columns than
// truth bins, for a work matrix of the covariance's size), the figure Unfold compares with the memory limit; 0 when s
// does not ask for the full covariance. The background variance adds a
// column per reco bin when it is propagated (background in the model).
// It lets a caller state the memory before the computation starts.
func FullCovarianceBytes(p *Problem, s *Settings) (int64, error) {
	rs, err := s.Resolve()
	if err != nil || rs.Covariance != Full || p.Migrations == nil {
		return 0, err
	}
	nr, nt := p.Migrations.Dims()
	varB := p.BackgroundVariance != nil && rs.Background == InModel
	return denseBytes(nt, columns(nr, varB), true), nil
}

// planUncertainty chooses the computation of rs for m and refuses, with a
// *TooLargeError, what does not fit under the memory limit.
func planUncertainty(m *Prepared, rs *Settings) (*plan, error) {
	pl := &plan{m: m, rs: rs, method: rs.Covariance}
	cols := m.Columns()
	switch rs.Covariance {
	case NoCovariance:
		return pl, nil
	case Full:
		if b := denseBytes(m.nt, cols, true); b > rs.MemoryLimit {
			return nil, &TooLargeError{
				What: "the full covariance (dense Jacobian and covariance matrix)", TruthBins: m.nt, RecoBins: m.nr, Columns: cols,
				Bytes: b, Limit: rs.MemoryLimit,
				Alternative: fmt.Sprintf("ask for per-bin variances only (diagonal covariance, %d random probes by default), or raise the memory limit", DefaultProbes),
			}
		}
		return pl, nil
	}
	pl.diag = rs.DiagonalMethod
	fits := denseBytes(m.nt, cols, false) <= rs.MemoryLimit
	switch pl.diag {
	case DiagonalAuto:
		if fits {
			pl.diag = DiagonalExact
		} else {
			pl.diag = DiagonalProbes
		}
	case DiagonalExact:
		if !fits {
			return nil, &TooLargeError{
				What: "the exact per-bin variances (dense Jacobian)", TruthBins: m.nt, RecoBins: m.nr, Columns: cols,
				Bytes: denseBytes(m.nt, cols, false), Limit: rs.MemoryLimit,
				Alternative: "use random probes or Poisson toys for the per-bin variances, or raise the memory limit",
			}
		}
	}
	switch pl.diag {
	case DiagonalProbes:
		per, fixed := ProbeBytes(m), probeOverhead(m)
		if 2*(per+fixed) > rs.MemoryLimit {
			return nil, &TooLargeError{
				What: "one random probe and the buffers of a batch (probes run in batches within half the memory limit)", TruthBins: m.nt, RecoBins: m.nr, Columns: cols,
				Bytes: 2 * (per + fixed), Limit: rs.MemoryLimit,
				Alternative: "use Poisson toys for the per-bin variances, or raise the memory limit",
			}
		}
		pl.batch = probeBatch(rs.Probes, min(rs.MemoryLimit/2, ProbeBatchBytes)-fixed, per)
	case DiagonalToys, DiagonalGamma:
		per, fixed := toyBytes(m), int64(0)
		if pl.diag == DiagonalToys {
			fixed = poissonMeanBytes * int64(m.nr) // toyMeans, shared by the toys
		}
		if 2*(per+fixed) > rs.MemoryLimit {
			return nil, &TooLargeError{
				What: "one Poisson toy or Gamma sample and the constants of the draws (they run at once within half the memory limit)", TruthBins: m.nt, RecoBins: m.nr, Columns: cols,
				Bytes: 2 * (per + fixed), Limit: rs.MemoryLimit,
				Alternative: "use random probes for the per-bin variances, or raise the memory limit",
			}
		}
		pl.toyWorkers = int(min(int64(runtime.GOMAXPROCS(0)), (rs.MemoryLimit/2-fixed)/per))
		pl.toyBlocks = toyBlockBytes(m)+fixed <= rs.MemoryLimit/2
	}
	return pl, nil
}

// expectedVariance returns the variance of the data from the folded
// expectation nu = R μ + b (method.md §24; nu is the fit's fold, without
// the background in Subtract mode, which adds it): nu_i for Poisson counts,
// scaled by var n_i / n_i for data with their own variances (where
// n_i > 0); in Subtract mode the background variance is added and the
// clipped bins keep 0.
func (m *Prepared) expectedVariance(nu []float64) []float64 {
	v := make([]float64, m.nr)
	sub := m.mode == Subtract && m.bg != nil
	for i, x := range nu {
		if sub && m.varN[i] == 0 && m.n[i] == 0 && slices.Contains(m.clip, i) {
			continue
		}
		if sub {
			x += m.bg[i] // the fit's fold leaves out the subtracted background
		}
		x = max(x, 0)
		if m.givenVar && !sub && m.n[i] > 0 {
			x *= m.varN[i] / m.n[i]
		}
		if sub && m.bgVar != nil {
			x += m.bgVar[i]
		}
		v[i] = x
	}
	return v
}

// probeOverhead is the memory a batch of probes holds besides its
// probes (ProbeBytes each): a block of reco tangents and a few reco
// vectors of the method, the standard deviations and the sum of the
// variances.
func probeOverhead(m *Prepared) int64 {
	return 8*int64(m.nr)*(ProbeBlock+6) + 8*int64(m.nt)*2
}

// toyBytes is the memory estimate of one toy run at a time: the
// pseudo-data and the runner's copy of the iteration's vectors (about
// eight truth and eight reco vectors), and its share of the ensembles.
func toyBytes(m *Prepared) int64 {
	return 8 * (10*int64(m.nr) + 12*int64(m.nt))
}

// probeBatch returns the probes per batch for probes of per bytes within
// budget: a multiple of ProbeBlock when more than a block fits (at least
// one probe), at most all of them.
func probeBatch(probes int, budget, per int64) int {
	n := budget / per
	if n >= ProbeBlock {
		n -= n % ProbeBlock
	}
	return int(max(1, min(int64(probes), n)))
}

// columnVariances returns the variances of the Jacobian's columns.
func (pl *plan) columnVariances() []float64 {
	v := append([]float64(nil), pl.m.varN...)
	if pl.m.varB != nil {
		v = append(v, pl.m.varB...)
	}
	return v
}

// finish completes the uncertainty computation into res, asking fit for
// the Jacobian, the probes' tangents or the toys' estimates.
func (pl *plan) finish(ctx context.Context, fit Fit, res *Result) error {
	m := pl.m
	if pl.rs.VarianceFrom == FromExpectation && pl.method != NoCovariance {
		// The fit is done: only the propagation sees the variance of
		// the expectation (method.md §24).
		observed := m.varN
		m.varN = m.expectedVariance(fit.Folded())
		defer func() { m.varN = observed }()
	}
	var variance []float64
	var cov *mat.SymDense
	var derived []*mat.SymDense
	ds := res.DerivedJacobians
	switch {
	case pl.method == NoCovariance:
		return nil
	case pl.method == Full || pl.diag == DiagonalExact:
		jc := NewJacobian(m)
		if n := len(steps(fit)); n > 0 {
			cv := pl.columnVariances()
			res.StepVariance = make([][]float64, n)
			jc.step = func(k int) {
				if k >= 0 && k < n {
					res.StepVariance[k] = jc.variances(cv)
				}
			}
		}
		if pl.method == Full {
			jc.ColumnVariances = pl.columnVariances()
		}
		if err := fit.Jacobian(ctx, jc); err != nil {
			return err
		}
		derived = jacobianDerived(ds, jc, pl.columnVariances())
		if pl.method == Full {
			if jc.Covariance != nil {
				jc.Work = nil
				cov = mat.NewSymDense(m.nt, jc.Covariance)
			} else {
				c, err := jc.covariance(ctx, pl.columnVariances())
				if err != nil {
					return err
				}
				cov = c
			}
			variance = make([]float64, m.nt)
			for j := range variance {
				variance[j] = cov.At(j, j)
			}
		} else {
			variance = jc.variances(pl.columnVariances())
		}
		res.UncertaintyMethod = "linearised"
	case pl.diag == DiagonalProbes:
		sum := make([]float64, m.nt)
		var pr *Probes
		derived = make([]*mat.SymDense, len(ds))
		for i, D := range ds {
			derived[i] = mat.NewSymDense(D.Rows, nil)
		}
		n := len(steps(fit))
		if n > 0 {
			res.StepVariance = make([][]float64, n)
			for k := range res.StepVariance {
				res.StepVariance[k] = make([]float64, m.nt)
			}
		}
		first := 0
		for _, size := range probeBatches(pl.rs.Probes, pl.batch) {
			pr = drawProbes(pr, m, first, size, pl.rs.Seed)
			first += size
			pr.step = nil
			if n > 0 {
				pr.step = func(k int) {
					if k >= 0 && k < n {
						pr.accumulate(res.StepVariance[k])
					}
				}
			}
			if err := fit.Tangents(ctx, pr); err != nil {
				return err
			}
			pr.accumulate(sum)
			pr.accumulateDerived(derived, ds)
		}
		for j := range sum {
			sum[j] /= float64(pl.rs.Probes)
		}
		for _, c := range derived {
			c.ScaleSym(1/float64(pl.rs.Probes), c)
		}
		for _, v := range res.StepVariance {
			for j := range v {
				v[j] /= float64(pl.rs.Probes)
			}
		}
		variance = sum
		res.UncertaintyMethod = "linearised-probes"
		res.Streams = append(res.Streams, Stream{Unit: "probe", Offset: probeStream})
		res.Samples = pl.rs.Probes
		res.UncertaintyPrecision = math.Sqrt(2 / float64(pl.rs.Probes))
	case pl.diag == DiagonalToys || pl.diag == DiagonalGamma:
		seed := pl.rs.Seed
		var draw func(t int, n, b []float64)
		res.UncertaintyMethod = "poisson-toys"
		st := Stream{Unit: "poisson-toy", Offset: toyStream}
		if pl.diag == DiagonalToys {
			means := toyMeans(m)
			draw = func(t int, n, b []float64) { toyData(m, means, seed, t, n, b) }
		} else {
			prior := pl.rs.SamplingPrior
			draw = func(t int, n, b []float64) { gammaData(m, prior, seed, t, n, b) }
			res.UncertaintyMethod = "gamma-samples"
			st = Stream{Unit: "gamma-sample", Offset: gammaStream}
		}
		res.Streams = append(res.Streams, st)
		dens := derivedEnsembles(ds)
		v, sv, err := toyVariances(ctx, m, fit, pl.rs.Toys, draw, pl.toyWorkers, pl.toyBlocks, ds, dens)
		if err != nil {
			return err
		}
		derived = ensembleDerived(dens)
		variance, res.StepVariance = v, sv
		res.Samples = pl.rs.Toys
		res.UncertaintyPrecision = math.Sqrt(2 / float64(pl.rs.Toys-1))
	}
	for j := range variance {
		if !m.det[j] || variance[j] < 0 {
			variance[j] = 0
		}
	}
	res.AddSource(Source{Name: SourceData, Method: res.UncertaintyMethod, Variance: variance, Covariance: cov,
		Precision: res.UncertaintyPrecision, Samples: res.Samples, Derived: derived})
	return nil
}
