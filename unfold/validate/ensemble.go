package validate

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/internal/parallel"
	"gonum.org/v1/gonum/stat/distuv"
)

// BlockToys is the number of consecutive toys accumulated together; a
// split ensemble must start each part at a multiple of it.
const BlockToys = 50

// toyStream offsets the PCG stream of each toy (stream = toyStream + toy
// number); it differs from the streams of unfold's own toys, so a
// validation toy never repeats an uncertainty toy of the same seed.
const toyStream = 0x76616c6964617465 // "validate"

// ToyStream is the PCG stream of toy t of an ensemble (with the
// ensemble's seed): a toy's pseudo-data depend on the seed and its
// number only, never on the part of the ensemble it is run in.
func ToyStream(t int) uint64 { return toyStream + uint64(t) }

// Config is a toy ensemble: the problem, the truth the toys are drawn
// from, the method at each regularisation strength and the toy count.
type Config struct {
	// Problem is the nominal problem: its response, generated counts,
	// background and prior are used; its Data only to check it.
	Problem *unfold.Problem
	// Settings are the common settings (background mode, memory limit,
	// probe count). The covariance is replaced by the per-bin diagonal
	// (DiagonalAuto unless DiagonalMethod says otherwise).
	Settings *unfold.Settings
	// Method returns the method at regularisation strength k, k = 1..MaxK
	// (for the iterative method: k iterations). When Method(MaxK) is a
	// Scanner, each toy is unfolded once with its steps kept, and the
	// estimate and uncertainty at k are those of step k.
	Method func(k int) unfold.Method
	// MaxK is the largest regularisation strength scanned (≥ 1).
	MaxK int
	// Truth t_j is the expected count per truth bin the toys are drawn
	// from (ν = R t + b).
	Truth []float64
	// Toys is the total number of toys of the ensemble (≥ 2).
	Toys int
	// Seed seeds the toys.
	Seed uint64
	// Progress, when not nil, is called after each toy with the toys
	// done and the toys of this run, from one goroutine at a time.
	Progress func(done, total int)
}

// Scanner is a method whose computation passes through the
// regularisation strengths 1..k in order (the iterations of the
// iterative method) and can keep them: Scanned returns the method
// keeping every step (an unfold.Stepper fit, whose step k is what the
// method at strength k computes, bit for bit). A toy scan then costs one
// run of the largest strength instead of one run per strength.
type Scanner interface {
	unfold.Method
	Scanned() unfold.Method
}

// Block holds the moments of BlockToys consecutive toys (fewer for the
// last block), one Acc per k.
type Block struct {
	First int   `json:"first"`
	Toys  int   `json:"toys"`
	Acc   []Acc `json:"acc"`
}

// Acc accumulates the toys of one k: per truth bin the estimates, their
// stated uncertainties and the pulls, the toys whose ±1σ interval covers
// the truth, and the summed squared errors (plain and weighted by
// 1/t_j).
type Acc struct {
	Estimate Moments `json:"estimate"`
	Sigma    Moments `json:"sigma"`
	Pull     Moments `json:"pull"`
	Covered  []int64 `json:"covered"`
	SqErr    Moments `json:"sq_err"`
	SqErrW   Moments `json:"sq_err_weighted"`
}

func newAcc(nt int) Acc {
	return Acc{Estimate: newMoments(nt), Sigma: newMoments(nt), Pull: newMoments(nt), Covered: make([]int64, nt), SqErr: newMoments(1), SqErrW: newMoments(1)}
}

func (a *Acc) merge(o *Acc) {
	a.Estimate.merge(&o.Estimate)
	a.Sigma.merge(&o.Sigma)
	a.Pull.merge(&o.Pull)
	for j, c := range o.Covered {
		a.Covered[j] += c
	}
	a.SqErr.merge(&o.SqErr)
	a.SqErrW.merge(&o.SqErrW)
}

// Ensemble is the accumulated toys of a run, or of several merged runs:
// its blocks in toy order.
type Ensemble struct {
	MaxK   int       `json:"max_k"`
	Truth  []float64 `json:"truth"`
	Det    []bool    `json:"determined"`
	Seed   uint64    `json:"seed"`
	Blocks []Block   `json:"blocks"`
}

// Toys returns the number of toys in e.
func (e *Ensemble) Toys() int {
	n := 0
	for _, b := range e.Blocks {
		n += b.Toys
	}
	return n
}

func (c *Config) check() (*unfold.Prepared, error) {
	switch {
	case c.Method == nil:
		return nil, fmt.Errorf("validate: no method given")
	case c.MaxK < 1:
		return nil, &unfold.SettingsError{Field: "MaxK", Reason: "must be ≥ 1"}
	case c.Toys < 2:
		return nil, &unfold.SettingsError{Field: "Toys", Reason: "must be at least 2"}
	}
	rs, err := c.Settings.Resolve()
	if err != nil {
		return nil, err
	}
	p, err := unfold.Prepare(c.Problem, rs.Background)
	if err != nil {
		return nil, err
	}
	if len(c.Truth) != p.TruthBins() {
		return nil, fmt.Errorf("validate: the toy truth has %d entries, want one per truth bin (%d)", len(c.Truth), p.TruthBins())
	}
	for j, t := range c.Truth {
		if !(t >= 0) || math.IsInf(t, 0) {
			return nil, fmt.Errorf("validate: the toy truth of truth bin %d is %v, not a finite number ≥ 0", j, t)
		}
	}
	return p, nil
}

// expected returns ν = R t + b for the problem p was prepared from.
func expected(p *unfold.Prepared, bkg, t []float64) []float64 {
	nu := make([]float64, p.RecoBins())
	p.Fold(nu, t, make([]float64, p.TruthBins()))
	for i, b := range bkg {
		nu[i] += b
	}
	return nu
}

// poisson fills n with Poisson counts of means nu from PCG stream
// stream of seed (toy t uses toyStream + t).
func poisson(n, nu []float64, seed, stream uint64) {
	src := rand.NewPCG(seed, stream)
	for i, x := range nu {
		if x > 0 {
			n[i] = distuv.Poisson{Lambda: x, Src: src}.Rand()
		} else {
			n[i] = 0
		}
	}
}

// Run unfolds toys first..first+count−1 of the ensemble of c (all of
// them when count is 0) and returns their moments. first must be a
// multiple of BlockToys, and first+count at most c.Toys. Toys run
// concurrently; their moments are accumulated in toy order, so the bits
// do not depend on the number of cores.
//
// Errors: those of unfold.Unfold on the toys (naming the toy), a
// *unfold.SettingsError for an invalid configuration, and ctx.Err().
func Run(ctx context.Context, c *Config, first, count int) (*Ensemble, error) {
	p, err := c.check()
	if err != nil {
		return nil, err
	}
	if count == 0 {
		count = c.Toys - first
	}
	if first < 0 || first%BlockToys != 0 || count < 1 || first+count > c.Toys {
		return nil, fmt.Errorf("validate: toys %d..%d: a part starts at a multiple of %d and ends by toy %d", first, first+count-1, BlockToys, c.Toys-1)
	}
	nt, K := p.TruthBins(), c.MaxK
	nu := expected(p, c.Problem.Background, c.Truth)
	rs, _ := c.Settings.Resolve()
	rs.Covariance = unfold.Diagonal
	if rs.DiagonalMethod == unfold.DiagonalToys {
		rs.DiagonalMethod = unfold.DiagonalAuto
	}
	e := &Ensemble{MaxK: K, Truth: append([]float64(nil), c.Truth...), Det: append([]bool(nil), p.Determined()...), Seed: c.Seed}

	workers := max(1, min(runtime.GOMAXPROCS(0), count))
	var scan unfold.Method
	if sc, ok := c.Method(K).(Scanner); ok {
		scan = sc.Scanned()
	}
	slots := make([]slot, workers)
	for w := range slots {
		sl := &slots[w]
		sl.prob = *c.Problem
		sl.prob.Data = make([]float64, len(nu))
		sl.prob.DataVariance = nil // toys are Poisson
		sl.est, sl.sig = make([][]float64, K), make([][]float64, K)
	}
	done := 0
	var blk *Block
	for t0 := first; t0 < first+count; t0 += workers {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		batch := min(workers, first+count-t0)
		parallel.For(batch, batch, func(w int) {
			sl := &slots[w]
			sl.err = nil
			poisson(sl.prob.Data, nu, c.Seed, ToyStream(t0+w))
			if scan != nil {
				sl.err = sl.scan(ctx, &rs, scan, K, t0+w)
				return
			}
			for k := 1; k <= K; k++ {
				res, err := unfold.Unfold(ctx, &sl.prob, &rs, c.Method(k))
				if err != nil {
					sl.err = fmt.Errorf("toy %d, regularisation %d: %w", t0+w, k, err)
					return
				}
				sl.est[k-1], sl.sig[k-1] = res.Estimate, res.Uncertainty
			}
		})
		for w := 0; w < batch; w++ {
			sl := &slots[w]
			if sl.err != nil {
				return nil, sl.err
			}
			t := t0 + w
			if blk == nil || t >= blk.First+BlockToys {
				e.Blocks = append(e.Blocks, Block{First: t - t%BlockToys, Acc: make([]Acc, K)})
				blk = &e.Blocks[len(e.Blocks)-1]
				for k := range blk.Acc {
					blk.Acc[k] = newAcc(nt)
				}
			}
			blk.Toys++
			for k := range K {
				blk.Acc[k].addToy(sl.est[k], sl.sig[k], c.Truth, e.Det)
			}
			done++
			if c.Progress != nil {
				c.Progress(done, count)
			}
		}
	}
	return e, nil
}

// slot is the work of one toy at a time: its problem (the toy's data)
// and its estimates and uncertainties per k.
type slot struct {
	prob     unfold.Problem
	est, sig [][]float64 // per k
	err      error
}

// scan unfolds the slot's toy once with the scanning method m (MaxK = K)
// and takes the estimate and uncertainty at k from step k.
func (sl *slot) scan(ctx context.Context, rs *unfold.Settings, m unfold.Method, K, toy int) error {
	res, err := unfold.Unfold(ctx, &sl.prob, rs, m)
	if err != nil {
		return fmt.Errorf("toy %d: %w", toy, err)
	}
	if len(res.StepEstimates) != K+1 || len(res.StepVariance) != K+1 {
		return fmt.Errorf("validate: toy %d: the scanning method kept %d steps, want %d", toy, len(res.StepEstimates), K+1)
	}
	for k := 1; k <= K; k++ {
		sig := sl.sig[k-1]
		if len(sig) != len(res.Estimate) {
			sig = make([]float64, len(res.Estimate))
			sl.sig[k-1] = sig
		}
		for j, v := range res.StepVariance[k] {
			sig[j] = 0
			if res.Determined[j] && v > 0 {
				sig[j] = math.Sqrt(v) // as unfold.Result.Uncertainty
			}
		}
		sl.est[k-1] = res.StepEstimates[k]
	}
	return nil
}

// addToy adds one toy's estimate and uncertainties.
func (a *Acc) addToy(est, sig, truth []float64, det []bool) {
	var se, sew float64
	for j, x := range est {
		if !det[j] {
			continue
		}
		t, s := truth[j], sig[j]
		d := x - t
		a.Estimate.add(j, x)
		a.Sigma.add(j, s)
		if s > 0 {
			a.Pull.add(j, d/s)
		}
		if math.Abs(d) <= s {
			a.Covered[j]++
		}
		se += d * d
		if t > 0 {
			sew += d * d / t
		}
	}
	a.SqErr.add(0, se)
	a.SqErrW.add(0, sew)
}

// Merge returns the ensemble of the given parts of one configuration
// (same truth, seed and MaxK), which must hold disjoint toys; the
// blocks are put in toy order. The result is the same, bit for bit, as
// one run over all the toys.
func Merge(parts ...*Ensemble) (*Ensemble, error) {
	if len(parts) == 0 {
		return nil, fmt.Errorf("validate: nothing to merge")
	}
	p0 := parts[0]
	out := &Ensemble{MaxK: p0.MaxK, Truth: p0.Truth, Det: p0.Det, Seed: p0.Seed}
	for i, p := range parts {
		if p.MaxK != p0.MaxK || p.Seed != p0.Seed || !slices.Equal(p.Truth, p0.Truth) || !slices.Equal(p.Det, p0.Det) {
			return nil, fmt.Errorf("validate: part %d comes from another configuration (truth, seed or regularisation range differ)", i)
		}
		out.Blocks = append(out.Blocks, p.Blocks...)
	}
	slices.SortFunc(out.Blocks, func(a, b Block) int { return a.First - b.First })
	for i := 1; i < len(out.Blocks); i++ {
		if a, b := out.Blocks[i-1], out.Blocks[i]; a.First+a.Toys > b.First {
			return nil, fmt.Errorf("validate: toys %d..%d are in two parts", b.First, a.First+a.Toys-1)
		}
	}
	return out, nil
}

// complete reports whether e holds toys 0..toys−1, each once, in
// blocks in toy order (as Run and Merge make them).
func (e *Ensemble) complete(toys int) error {
	next := 0
	for _, b := range e.Blocks {
		if b.First != next {
			return fmt.Errorf("validate: toys %d..%d are missing from the ensemble", next, b.First-1)
		}
		next = b.First + b.Toys
	}
	if next != toys {
		return fmt.Errorf("validate: the ensemble holds toys 0..%d, want 0..%d", next-1, toys-1)
	}
	return nil
}

// total returns the moments of all toys of k (0-based), the blocks
// merged in toy order.
func (e *Ensemble) total(k int) Acc {
	nt := len(e.Truth)
	a := newAcc(nt)
	for i := range e.Blocks {
		a.merge(&e.Blocks[i].Acc[k])
	}
	return a
}
