package unfold

import (
	"math"
	"runtime"
	"slices"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// Problem holds the inputs of an unfolding. Bins are global indices:
// reco bins index the rows of Migrations and the data, truth bins its
// columns and the generated counts.
type Problem struct {
	// Migrations A_ij is the weighted simulated count generated in truth
	// bin j and reconstructed in reco bin i (rows: reco, columns: truth).
	Migrations *sparse.Matrix
	// Generated G_j is the weighted simulated count generated in truth
	// bin j, whether reconstructed or not. Σ_i A_ij ≤ G_j.
	Generated []float64
	// GeneratedSumW2 is Σ w² of the simulated events generated in each
	// truth bin (G_j being Σ w); nil when unknown (for example a
	// normalised response). Only the sampling of the response uses it:
	// N_eff,j = G_j² / GeneratedSumW2_j is the column's effective count
	// (method.md §20).
	GeneratedSumW2 []float64

	// Data n_i is the observed count in reco bin i.
	Data []float64
	// DataVariance is the variance of n_i; nil means Poisson (n_i), as
	// for unweighted data.
	DataVariance []float64

	// Background b_i is the expected background (fakes, other
	// processes) in reco bin i; nil means none.
	Background []float64
	// BackgroundVariance is the variance of b_i; nil means the
	// background is known exactly.
	BackgroundVariance []float64

	// Prior p_j is the starting shape; nil means Generated. Only its
	// shape matters, it is scaled to the data.
	Prior []float64

	// Derived lists quantities derived from the estimate (projections,
	// shapes) whose covariance every source of uncertainty propagates
	// by itself, without the full covariance of the estimate
	// (Source.Derived, Result.DerivedCovariance; method.md §22); nil
	// for none.
	Derived []Derived
}

// Prepared is a validated Problem in the form every method uses: the
// efficiencies, the determined truth bins, 1/G, and the data, variances
// and background as they enter the fit in the chosen background mode.
// Make one with Prepare. The slices its accessors return are its own and
// must not be modified.
type Prepared struct {
	nt, nr   int
	a        *sparse.Matrix // A_ij; the response is R_ij = A_ij invG_j (never stored)
	invG     []float64      // 1/G_j, 0 where not determined
	eps      []float64      // Σ_i R_ij
	invEps   []float64      // 1/eps_j, 0 where not determined
	det      []bool         // eps_j > 0
	n        []float64      // data used by the fit (n − b clipped in Subtract mode)
	b        []float64      // background inside ν (nil in Subtract mode or without background)
	varN     []float64      // variance of n as used (in Subtract mode var n + var b, 0 where clipped)
	varB     []float64      // variance of b inside ν; nil when not propagated
	prior    []float64      // prior, 0 where not determined
	sumEP    float64        // Σ_j eps_j p_j
	clip     []int          // Subtract mode: reco bins where n − b < 0
	weighted bool           // var n is not n (given variances or a subtracted background)
	givenVar bool           // the data came with their own variances

	// kept for the Set methods
	mode      BackgroundMode
	gen       []float64 // Generated (the caller's)
	priorSrc  []float64 // Prior as given (the caller's; nil: Generated)
	bg, bgVar []float64 // Background, BackgroundVariance (the caller's)
	reach     []float64 // row sums of A
	clipBuf   []int     // storage of clip
	errs      []error   // one per validation task
	rp        []float64 // R p, valid when rpValid
	rpTmp     []float64 // truth-sized scratch of R p
	rpValid   bool
}

// EfficiencyTolerance is the relative allowance for rounding in the
// check Σ_i A_ij ≤ G_j (an efficiency of at most 1): a truth bin whose
// migrations exceed its generated count by more is an *InputError.
const EfficiencyTolerance = 1e-9

func checkVector(field string, v []float64, n int, reco bool, optional bool) error {
	if v == nil && optional {
		return nil
	}
	if len(v) != n {
		kind := "truth"
		if reco {
			kind = "reco"
		}
		return inputErr(field, -1, -1, "has %d entries, want one per %s bin (%d)", len(v), kind, n)
	}
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) || x < 0 {
			if reco {
				return inputErr(field, i, -1, "value %v is not a finite number ≥ 0", x)
			}
			return inputErr(field, -1, i, "value %v is not a finite number ≥ 0", x)
		}
	}
	return nil
}

// Prepare validates p and prepares it for background mode mode.
//
// Errors: *InputError for invalid or inconsistent inputs, naming the
// Problem field and the bins concerned.
func Prepare(p *Problem, mode BackgroundMode) (*Prepared, error) {
	if p == nil || p.Migrations == nil {
		return nil, inputErr("Migrations", -1, -1, "no response given")
	}
	a := p.Migrations
	nr, nt := a.Dims()
	if nr == 0 || nt == 0 || a.NNZ() == 0 {
		return nil, inputErr("Migrations", -1, -1, "the response is empty (%d reco × %d truth bins, %d entries)", nr, nt, a.NNZ())
	}
	if err := checkVector("Generated", p.Generated, nt, false, false); err != nil {
		return nil, err
	}
	if err := checkVector("Data", p.Data, nr, true, false); err != nil {
		return nil, err
	}
	for _, c := range []struct {
		f    string
		v    []float64
		reco bool
	}{
		{"DataVariance", p.DataVariance, true},
		{"Background", p.Background, true},
		{"BackgroundVariance", p.BackgroundVariance, true},
		{"Prior", p.Prior, false},
	} {
		n := nr
		if !c.reco {
			n = nt
		}
		if err := checkVector(c.f, c.v, n, c.reco, true); err != nil {
			return nil, err
		}
	}
	if p.BackgroundVariance != nil && p.Background == nil {
		return nil, inputErr("BackgroundVariance", -1, -1, "given without a background")
	}

	m := &Prepared{nt: nt, nr: nr, mode: mode, bg: p.Background, bgVar: p.BackgroundVariance,
		invG: make([]float64, nt), eps: make([]float64, nt), invEps: make([]float64, nt), det: make([]bool, nt),
		reach: make([]float64, nr), prior: make([]float64, nt)}
	m.errs = make([]error, (nt+colBlock-1)/colBlock)
	if mode == Subtract && p.Background != nil {
		m.n = make([]float64, nr)
		m.varN = make([]float64, nr)
	}
	if err := m.setResponse(a, p.Generated); err != nil {
		return nil, err
	}
	if err := m.setData(p.Data, p.DataVariance); err != nil {
		return nil, err
	}
	if err := m.setPrior(p.Prior); err != nil {
		return nil, err
	}
	return m, nil
}

// colBlock is the number of columns of one task of the response's
// validation.
const colBlock = 4096

// setResponse validates the migrations a with generated counts g and sets
// A, 1/G, the efficiencies, the determined bins and the row sums, into
// m's buffers. The data and the prior must be set again after it.
func (m *Prepared) setResponse(a *sparse.Matrix, g []float64) error {
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	nt := m.nt
	// Columns in fixed blocks on several goroutines; each column is
	// summed serially, so the result does not depend on the scheduling.
	errs := m.errs
	clear(errs)
	parallel.For(len(errs), runtime.GOMAXPROCS(0), func(b int) {
		for j := b * colBlock; j < min(nt, (b+1)*colBlock); j++ {
			m.invG[j], m.eps[j], m.invEps[j], m.det[j] = 0, 0, 0, false
			g := g[j]
			var sum float64
			for k := colPtr[j]; k < colPtr[j+1]; k++ {
				v := val[k]
				if v < 0 {
					errs[b] = inputErr("Migrations", rowIdx[k], j, "negative migration count %v (the iteration needs a non-negative response; merge or clip bins)", v)
					return
				}
				sum += v
			}
			if sum == 0 {
				continue // no migrations: not determined
			}
			if g == 0 {
				errs[b] = inputErr("Generated", -1, j, "truth bin has migrations (Σ = %v) but no generated count", sum)
				return
			}
			if sum > g*(1+EfficiencyTolerance) {
				errs[b] = inputErr("Generated", -1, j, "generated count %v is below the reconstructed count %v (efficiency > 1)", g, sum)
				return
			}
			inv := 1 / g
			var e float64
			for k := colPtr[j]; k < colPtr[j+1]; k++ {
				e += val[k] * inv
			}
			m.invG[j] = inv
			m.eps[j] = e
			m.invEps[j] = 1 / e
			m.det[j] = true
		}
	})
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	m.a, m.gen = a, g
	m.rpValid = false
	// Some determined truth bin reaches reco bin i when row i of A has a
	// positive sum (all entries are ≥ 0, and a column with a positive
	// entry is determined).
	a.RowSums(m.reach)
	return nil
}

// setData sets the data n and its variance (nil: Poisson) as the fit uses
// them in m's background mode, and checks that every count is reached by
// the response or explained by the background. In Subtract mode it
// writes into m's own buffers, otherwise m keeps n and varN.
func (m *Prepared) setData(n, varN []float64) error {
	given := varN != nil
	if varN == nil {
		varN = n
	}
	clip := m.clipBuf[:0]
	switch {
	case m.mode == Subtract && m.bg != nil:
		for i := range n {
			m.n[i], m.varN[i] = 0, 0
			d := n[i] - m.bg[i]
			if d < 0 {
				clip = append(clip, i)
				continue
			}
			m.n[i] = d
			m.varN[i] = varN[i]
			if m.bgVar != nil {
				m.varN[i] += m.bgVar[i]
			}
		}
	default:
		m.n = n
		m.varN = varN
		m.b = m.bg
		m.varB = m.bgVar
	}
	m.clipBuf, m.clip = clip, nil
	if len(clip) > 0 {
		m.clip = clip
	}
	for i, x := range m.n {
		if x > 0 && !(m.reach[i] > 0) && (m.b == nil || m.b[i] == 0) {
			return inputErr("Data", i, -1, "count %v in a reco bin that no truth bin reaches and no background explains", x)
		}
	}
	m.weighted = given || m.mode == Subtract && m.bg != nil
	m.givenVar = given
	return nil
}

// setPrior sets the prior (nil: the generated counts) on the determined
// bins and Σ_j eps_j p_j.
func (m *Prepared) setPrior(prior []float64) error {
	m.priorSrc = prior
	if prior == nil {
		prior = m.gen
	}
	m.sumEP = 0
	for j, d := range m.det {
		m.prior[j] = 0
		if d {
			m.prior[j] = prior[j]
			m.sumEP += m.eps[j] * prior[j]
		}
	}
	m.rpValid = false
	if !(m.sumEP > 0) {
		return inputErr("Prior", -1, -1, "the prior is zero in every truth bin the response can measure")
	}
	return nil
}

// SetData replaces the data and its variance (nil: Poisson, the counts
// themselves), keeping the response, the background and the prior, as
// for a new unfolding of the same problem with other data (toys,
// replicas). It validates them as Prepare does and allocates nothing
// (in Subtract mode the list of clipped bins may grow once). Outside
// Subtract mode m keeps data and variance, which must not be modified
// while m is in use. On an error m must not be used until a later call
// succeeds.
//
// Errors: *InputError as from Prepare for the fields Data and
// DataVariance, and when the data minus the background sum to ≤ 0.
func (m *Prepared) SetData(data, variance []float64) error {
	if err := checkVector("Data", data, m.nr, true, false); err != nil {
		return err
	}
	if err := checkVector("DataVariance", variance, m.nr, true, true); err != nil {
		return err
	}
	if err := m.setData(data, variance); err != nil {
		return err
	}
	return m.checkNet()
}

// SetPrior replaces the prior (nil: the generated counts), keeping the
// rest. m keeps prior, which must not be modified while m is in use. It
// allocates nothing.
//
// Errors: *InputError as from Prepare for the field Prior.
func (m *Prepared) SetPrior(prior []float64) error {
	if err := checkVector("Prior", prior, m.nt, false, true); err != nil {
		return err
	}
	return m.setPrior(prior)
}

// SetResponse replaces the migrations and the generated counts by a
// matrix of the same dimensions and sparsity pattern (for example one
// made with sparse.Matrix.WithValues: a resampled or varied response) and
// recomputes the efficiencies, the determined bins and the row sums into
// m's buffers, then checks the data and the prior again; it allocates
// nothing. m keeps a and generated, which must not be modified while m
// is in use. On an error m must not be used until a later call succeeds.
//
// Errors: *InputError as from Prepare for the fields Migrations,
// Generated, Data and Prior, and when a has another pattern.
func (m *Prepared) SetResponse(a *sparse.Matrix, generated []float64) error {
	if a == nil {
		return inputErr("Migrations", -1, -1, "no response given")
	}
	if !samePattern(a, m.a) {
		return inputErr("Migrations", -1, -1, "the new response has another sparsity pattern than the prepared one; prepare it as a new problem")
	}
	if err := checkVector("Generated", generated, m.nt, false, false); err != nil {
		return err
	}
	if err := m.setResponse(a, generated); err != nil {
		return err
	}
	for i, x := range m.n {
		if x > 0 && !(m.reach[i] > 0) && (m.b == nil || m.b[i] == 0) {
			return inputErr("Data", i, -1, "count %v in a reco bin that no truth bin reaches and no background explains", x)
		}
	}
	return m.setPrior(m.priorSrc)
}

// samePattern reports whether a and b have the same dimensions, column
// pointers and row indices (shared storage is recognised without a
// pass over it).
func samePattern(a, b *sparse.Matrix) bool {
	ar, ac := a.Dims()
	br, bc := b.Dims()
	if ar != br || ac != bc || a.NNZ() != b.NNZ() {
		return false
	}
	same := func(x, y []int) bool {
		return len(x) == 0 || &x[0] == &y[0] || slices.Equal(x, y)
	}
	return same(a.ColPtr(), b.ColPtr()) && same(a.RowIdx(), b.RowIdx())
}

// checkNet refuses data whose net count Σ (n − b) is not positive.
func (m *Prepared) checkNet() error {
	if net := m.net(); net <= 0 {
		return inputErr("Data", -1, -1, "the data minus the background sum to %v ≤ 0: there is nothing to unfold", net)
	}
	return nil
}

// PriorFold returns R p, the folded prior (reco-sized), computed on the
// first call after Prepare, SetPrior or SetResponse (which allocates its
// buffers once) and kept. It must not be called concurrently with
// itself or the Set methods. The slice is m's own.
func (m *Prepared) PriorFold() []float64 {
	if !m.rpValid {
		if m.rp == nil {
			m.rp = make([]float64, m.nr)
			m.rpTmp = make([]float64, m.nt)
		}
		m.Fold(m.rp, m.prior, m.rpTmp)
		m.rpValid = true
	}
	return m.rp
}

// SubtractedBackground returns the background subtracted from the data
// before the fit (Subtract mode), nil in the other modes or without a
// background. The folded spectrum comparable to the data is ν plus it.
func (m *Prepared) SubtractedBackground() []float64 {
	if m.mode == Subtract {
		return m.bg
	}
	return nil
}

// TruthBins returns the number of truth bins (columns of the response).
func (m *Prepared) TruthBins() int { return m.nt }

// RecoBins returns the number of reco bins (rows of the response).
func (m *Prepared) RecoBins() int { return m.nr }

// Migrations returns the migration matrix A; the response is
// R_ij = A_ij / G_j.
func (m *Prepared) Migrations() *sparse.Matrix { return m.a }

// InvGenerated returns 1/G_j, 0 where the truth bin is not determined.
func (m *Prepared) InvGenerated() []float64 { return m.invG }

// Efficiency returns eps_j = Σ_i R_ij.
func (m *Prepared) Efficiency() []float64 { return m.eps }

// InvEfficiency returns 1/eps_j, 0 where the truth bin is not determined.
func (m *Prepared) InvEfficiency() []float64 { return m.invEps }

// Determined reports the truth bins the response can measure
// (eps_j > 0); the others are excluded from the fit.
func (m *Prepared) Determined() []bool { return m.det }

// Undetermined returns the truth bins with eps_j = 0, in order.
func (m *Prepared) Undetermined() []int {
	var u []int
	for j, d := range m.det {
		if !d {
			u = append(u, j)
		}
	}
	return u
}

// Data returns the data n as the fit uses it: in Subtract mode
// max(n − b, 0).
func (m *Prepared) Data() []float64 { return m.n }

// DataVariance returns the variance of Data (Poisson n unless given; in
// Subtract mode var n + var b, 0 where clipped).
func (m *Prepared) DataVariance() []float64 { return m.varN }

// Background returns the background b that enters the expectation
// ν = R μ + b, nil in Subtract mode or without a background.
func (m *Prepared) Background() []float64 { return m.b }

// BackgroundVariance returns the variance of Background, nil when it is
// not propagated.
func (m *Prepared) BackgroundVariance() []float64 { return m.varB }

// Prior returns the prior p_j, 0 where not determined.
func (m *Prepared) Prior() []float64 { return m.prior }

// FoldedPrior returns Σ_j eps_j p_j (> 0).
func (m *Prepared) FoldedPrior() float64 { return m.sumEP }

// Clipped returns the reco bins where the data minus the background was
// negative and was set to zero (Subtract mode only).
func (m *Prepared) Clipped() []int { return m.clip }

// Columns returns the number of columns of the Jacobian dμ/d(n, b): the
// reco bins, twice when the background variance is propagated (columns
// RecoBins().. are then the background bins).
func (m *Prepared) Columns() int { return columns(m.nr, m.varB != nil) }

// columns is the number of columns of the Jacobian for nr reco bins, with
// or without the background variance propagated as columns of its own.
func columns(nr int, varB bool) int {
	if varB {
		return 2 * nr
	}
	return nr
}

// Net returns Σ_i (n_i − b_i) of the data as the fit uses them (in
// Subtract mode Σ_i max(n_i − b_i, 0)).
func (m *Prepared) Net() float64 { return m.net() }

// net returns Σ_i (n_i − b_i) of the data as used.
func (m *Prepared) net() float64 {
	var s float64
	for _, x := range m.n {
		s += x
	}
	for _, x := range m.b {
		s -= x
	}
	return s
}

// Fold computes dst = R x = A (x ∘ invG), using tmp (truth-sized) as
// scratch. dst must not alias x or tmp.
func (m *Prepared) Fold(dst, x, tmp []float64) {
	for j, v := range x {
		tmp[j] = v * m.invG[j]
	}
	m.a.Fold(dst, tmp)
}

// BackProject computes dst = Rᵀ y (truth-sized dst, reco-sized y).
func (m *Prepared) BackProject(dst, y []float64) {
	m.a.BackProject(dst, y)
	for j, ig := range m.invG {
		dst[j] *= ig
	}
}
