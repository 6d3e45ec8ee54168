package response

import (
	"context"
	"errors"
	"fmt"
	"math"

	"github.com/desmear/desmear/sparse"
)

// Simulation is a simulated sample: events with a truth level and a
// reco level.
type Simulation struct {
	Sample
	Truth Level
	Reco  Level
	// RecoInTruth, when not nil, gives for each axis of the TRUTH scheme
	// (in its axis order) the index, into Reco.Observables, of the reco
	// observable that measures it. Each event passing the reco selection
	// is then also located in the truth scheme with its reco values,
	// which defines purity and stability on the truth binning even when
	// the reco binning differs from it.
	RecoInTruth []int
}

// entries are the migration entries of one batch on their way to the
// accumulator.
type entries struct {
	end        *shardState // when not nil: the shard ends here
	seq        uint64
	rows, cols []int32
	w          []float64
}

// Summary counts what happened to the events of the samples.
type Summary struct {
	// Events is the number of events read.
	Events int64 `json:"events"`
	// Entries is the number of migration entries: events passing both
	// selections and located at both levels.
	Entries int64 `json:"entries"`
	// Misses is the number of events generated in a truth bin but not
	// in any reco bin (failing the reco selection, or outside the reco
	// scheme). They count in the generated spectrum only.
	Misses int64 `json:"misses"`
	// Fakes is the number of events in a reco bin without a truth bin
	// (failing the truth selection, or outside the truth scheme). They
	// go into the expected background.
	Fakes int64 `json:"fakes"`
	// OutsideTruth is the number of events passing the truth selection
	// that fall outside the truth scheme (a switched-off flow). Those
	// located in a reco bin are counted among the fakes as well.
	OutsideTruth int64 `json:"outside_truth"`
	// OutsideReco is the number of events passing the reco selection
	// that fall outside the reco scheme. Those located in a truth bin
	// are counted among the misses as well.
	OutsideReco int64 `json:"outside_reco"`
	// NegativeCellCount is the number of migration cells whose weight
	// sum is negative (possible with negative event weights), and
	// NegativeCells lists the first sparse.MaxReportedCells of them.
	NegativeCellCount int    `json:"negative_cell_count"`
	NegativeCells     []Cell `json:"negative_cells,omitempty"`
	// NegativeGenerated lists the truth bins whose generated sum is
	// negative.
	NegativeGenerated []int `json:"negative_generated,omitempty"`
}

// Add adds the counts of o (not its cell lists) to s.
func (s *Summary) Add(o *Summary) { s.add(o) }

func (s *Summary) add(o *Summary) {
	s.Events += o.Events
	s.Entries += o.Entries
	s.Misses += o.Misses
	s.Fakes += o.Fakes
	s.OutsideTruth += o.OutsideTruth
	s.OutsideReco += o.OutsideReco
}

// Built is a response built from simulated events.
type Built struct {
	// Migrations holds A_ij, the sum of weights of events generated in
	// truth bin j and reconstructed in reco bin i (rows are reco bins,
	// columns truth bins), with the sum of squared weights per cell.
	Migrations *sparse.Matrix
	// Generated holds G_j, the sum of weights of all events passing the
	// truth selection located in truth bin j (reconstructed or not), and
	// GeneratedSumW2 the sums of squared weights.
	Generated, GeneratedSumW2 []float64
	// Fakes holds the sum of weights of the fakes per reco bin, the
	// expected background from the simulation, and FakesSumW2 its sums
	// of squared weights (its variance).
	Fakes, FakesSumW2 []float64
	// Diagonal holds, per truth bin j, the sum of weights of events
	// generated in j whose reco observables are located in j as well;
	// RecoInTruth the sum of weights of events passing the reco
	// selection whose reco observables are located in truth bin j. Both
	// are nil when the simulation gave no RecoInTruth observables.
	Diagonal, RecoInTruth []float64
	// Summary counts the events.
	Summary Summary
}

// TruthBins returns the number of truth bins.
func (r *Built) TruthBins() int { return len(r.Generated) }

// RecoBins returns the number of reco bins.
func (r *Built) RecoBins() int { return len(r.Fakes) }

// Efficiency writes eps_j = sum_i A_ij / G_j into dst (allocated when
// nil) and returns it; it is NaN where G_j is zero. It panics if dst has
// the wrong length.
func (r *Built) Efficiency(dst []float64) []float64 {
	dst = use(dst, r.TruthBins())
	r.Migrations.ColSums(dst)
	for j := range dst {
		dst[j] = ratio(dst[j], r.Generated[j])
	}
	return dst
}

// Purity writes purity_j = Diagonal_j / RecoInTruth_j into dst: the
// fraction of events reconstructed in truth bin j's range that were
// also generated there. It returns nil when the response carries no
// RecoInTruth histogram; NaN where the denominator is zero.
func (r *Built) Purity(dst []float64) []float64 {
	if r.Diagonal == nil {
		return nil
	}
	dst = use(dst, r.TruthBins())
	for j := range dst {
		dst[j] = ratio(r.Diagonal[j], r.RecoInTruth[j])
	}
	return dst
}

// Stability writes stability_j = Diagonal_j / G_j into dst: the
// fraction of events generated in truth bin j that are also
// reconstructed in j's range. It returns nil when the response carries
// no RecoInTruth histogram; NaN where G_j is zero.
func (r *Built) Stability(dst []float64) []float64 {
	if r.Diagonal == nil {
		return nil
	}
	dst = use(dst, r.TruthBins())
	for j := range dst {
		dst[j] = ratio(r.Diagonal[j], r.Generated[j])
	}
	return dst
}

func use(dst []float64, n int) []float64 {
	if dst == nil {
		return make([]float64, n)
	}
	if len(dst) != n {
		panic("response: length mismatch")
	}
	return dst
}

func ratio(a, b float64) float64 {
	if b == 0 {
		return math.NaN()
	}
	return a / b
}

// Builder builds a response from one or more simulated samples. Samples
// are processed in the order they are added; the result depends only on
// the samples and their order, never on the number of workers.
//
// The unit of building is the shard (ShardRanges): every shard of a
// sample gets its own accumulator and histograms, and the partial
// responses are merged in shard order (Merger). Building all shards in
// one process, or some shards here and others elsewhere and merging the
// partials in shard order, gives the same bits.
type Builder struct {
	truth, reco Locator
	merger      *Merger
	withDiag    bool
	diag        *diagMap // the reco bins in the truth scheme, made by the first sample
	samples     int
	spare       chan *shardState // merged shard states, for the next shards
	// OnShard, when not nil, receives the partial response of every
	// shard as it is finished, in shard order, instead of the Builder
	// merging it (Build then has nothing to return). sample is the
	// number of the sample (0 for the first Add or AddRange), [lo, hi)
	// its events in the shard. The partial's Summary carries no cell
	// lists: negative cells are decided after the merge.
	OnShard func(sample int, lo, hi int64, p *Built) error
	// ShardEvents is the number of events of a shard; 0 means
	// DefaultShardEvents. It is part of the definition of the result.
	ShardEvents int64
	// MemoryLimit, when positive, bounds in bytes the memory budget of
	// each shard's accumulation (sparse.AccumulatorBytes) and of the
	// merges of the shards (MergeBytes); beyond it the build ends with a
	// *sparse.MemoryError. It does not change the result.
	MemoryLimit int64
}

// NewBuilder returns a Builder for the given truth and reco schemes.
func NewBuilder(truth, reco Locator) *Builder {
	nt, nr := truth.Len(), reco.Len()
	if nt >= math.MaxInt32 || nr >= math.MaxInt32 {
		panic("response: scheme too large")
	}
	return &Builder{truth: truth, reco: reco, merger: NewMerger(nt, nr), spare: make(chan *shardState, 2)}
}

// shardState is what a shard has gathered so far, on its way from the
// event loop to the accumulator's goroutine. The sums of one bin that
// an event adds to are kept side by side (one cache line per event and
// level, and one for both when an event's reco values fall in its truth
// bin): gen[t] holds G_t, its sum of squared weights, and the Diagonal
// and RecoInTruth sums of truth bin t (these two only with purity);
// fake[r] the fakes' sums.
type shardState struct {
	lo, hi   int64
	gen      [][4]float64
	fake     [][2]float64
	withDiag bool
	sum      Summary
}

// Add streams the events of sim into the response. It returns the
// counts for this sample alone. On error (a bad event, a read failure,
// cancellation) the Builder must not be used further.
func (b *Builder) Add(ctx context.Context, sim *Simulation, opt *Options) (Summary, error) {
	return b.add(ctx, sim, sim.Read, opt)
}

// AddRange streams the events [lo, hi) of sim into the response, with
// sim.ReadRange; lo must be a multiple of ShardEvents, so that the range
// is made of whole shards (hi may end the sample). An empty range gives
// one empty shard. It returns the counts of the range.
func (b *Builder) AddRange(ctx context.Context, sim *Simulation, lo, hi int64, opt *Options) (Summary, error) {
	if lo%b.shardEvents() != 0 || hi < lo {
		panic("response: AddRange of a range that is not made of whole shards")
	}
	if sim.ReadRange == nil {
		panic("response: AddRange of a sample without ReadRange")
	}
	read := func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
		return sim.ReadRange(ctx, lo, hi, fn)
	}
	s, err := b.add(ctx, sim, read, opt)
	if err == nil && lo == hi {
		err = b.emptyShard(lo)
	}
	return s, err
}

// emptyShard hands on the partial of a shard without events.
func (b *Builder) emptyShard(lo int64) error {
	acc, err := sparse.NewAccumulator(b.reco.Len(), b.truth.Len(), b.accOptions())
	if err != nil {
		panic(err)
	}
	st := b.newShard(lo)
	st.hi = lo
	return b.finishShard(acc, st)
}

// newShard returns an empty shard state starting at event lo: one
// merged before and cleared, or a new one.
func (b *Builder) newShard(lo int64) *shardState {
	var st *shardState
	select {
	case st = <-b.spare:
	default:
		nt, nr := b.truth.Len(), b.reco.Len()
		st = &shardState{gen: make([][4]float64, nt), fake: make([][2]float64, nr)}
	}
	st.lo, st.hi, st.sum, st.withDiag = lo, lo, Summary{}, b.withDiag
	return st
}

// finishShard turns the shard's accumulator and histograms into its
// partial response and hands it on.
func (b *Builder) finishShard(acc *sparse.Accumulator, st *shardState) error {
	m, _, err := acc.Matrix()
	if err != nil {
		return err
	}
	if b.OnShard != nil {
		err = b.OnShard(b.samples-1, st.lo, st.hi, st.built(m))
	} else {
		err = b.merger.addShard(m, st)
	}
	if err != nil {
		return err
	}
	// Handed on: the arrays serve the next shard.
	clear(st.gen)
	clear(st.fake)
	select {
	case b.spare <- st:
	default:
	}
	return nil
}

// built returns the shard's partial response, with histograms of its
// own.
func (st *shardState) built(m *sparse.Matrix) *Built {
	nt, nr := len(st.gen), len(st.fake)
	p := &Built{Migrations: m, Generated: make([]float64, nt), GeneratedSumW2: make([]float64, nt),
		Fakes: make([]float64, nr), FakesSumW2: make([]float64, nr), Summary: st.sum}
	for j, v := range st.gen {
		p.Generated[j], p.GeneratedSumW2[j] = v[0], v[1]
	}
	for i, v := range st.fake {
		p.Fakes[i], p.FakesSumW2[i] = v[0], v[1]
	}
	if st.withDiag {
		p.Diagonal, p.RecoInTruth = make([]float64, nt), make([]float64, nt)
		for j, v := range st.gen {
			p.Diagonal[j], p.RecoInTruth[j] = v[2], v[3]
		}
	}
	return p
}

// accOptions returns the options of a shard's accumulator.
func (b *Builder) accOptions() *sparse.AccumulatorOptions {
	return &sparse.AccumulatorOptions{MemoryLimit: b.MemoryLimit}
}

func (b *Builder) shardEvents() int64 {
	if b.ShardEvents > 0 {
		return b.ShardEvents
	}
	return DefaultShardEvents
}

func (b *Builder) add(ctx context.Context, sim *Simulation, read ReadFunc, opt *Options) (Summary, error) {
	withDiag := sim.RecoInTruth != nil
	if b.samples == 0 {
		b.withDiag = withDiag
	} else if b.withDiag != withDiag {
		return Summary{}, fmt.Errorf("%s: every simulated sample must give reco observables for the truth axes, or none", sim.Name)
	}
	b.samples++
	b.merger.MemoryLimit = b.MemoryLimit
	var dg *diagMap
	if withDiag {
		for _, ax := range sim.RecoInTruth {
			if ax < 0 || ax >= len(sim.Reco.Observables) {
				panic("response: RecoInTruth names a reco observable that does not exist")
			}
		}
		dg = b.diagFor(sim.RecoInTruth)
	}
	newWork := func() func(*scratch, *batch) error {
		weight := instantiate(sim.Weight)
		truth, reco := sim.Truth.instantiate(), sim.Reco.instantiate()
		return func(sc *scratch, bt *batch) error {
			if err := evalWeights(&sim.Sample, weight, bt); err != nil {
				return err
			}
			sc.locate(bt.truth, truth, b.truth, bt.cols, bt.n)
			sc.locate(bt.reco, reco, b.reco, bt.cols, bt.n)
			if withDiag {
				sc.locateDiag(bt.diag, bt.reco, dg, reco != nil)
			}
			// Migration entries of the batch, in event order, in
			// buffers of the batch's size (they circulate between
			// batches and the accumulator's queue: growing them by
			// appends would copy each several times).
			if cap(bt.erows) < bt.n {
				bt.erows, bt.ecols, bt.ew = make([]int32, 0, bt.n), make([]int32, 0, bt.n), make([]float64, 0, bt.n)
			}
			rows, cols, w := bt.erows[:0], bt.ecols[:0], bt.ew[:0]
			for k, t := range bt.truth {
				if r := bt.reco[k]; t >= 0 && r >= 0 {
					rows = append(rows, r)
					cols = append(cols, t)
					w = append(w, bt.w[k])
				}
			}
			bt.erows, bt.ecols, bt.ew = rows, cols, w
			return nil
		}
	}
	// The entries go to the shard's accumulator from a goroutine of their
	// own, in batch order within the shard, so that its chunk sorting
	// overlaps with reading and locating; a message with end set closes
	// the shard there.
	ctx, cancel := context.WithCancel(ctx)
	defer cancel()
	const queued = 64
	epool := make(chan *entries, queued)
	for i := 0; i < queued; i++ {
		epool <- &entries{}
	}
	ech := make(chan *entries, queued)
	accDone := make(chan error, 1)
	nt, nr := b.truth.Len(), b.reco.Len()
	go func() {
		var err error
		var acc *sparse.Accumulator
		for e := range ech {
			if err == nil && acc == nil {
				if acc, err = sparse.NewAccumulator(nr, nt, b.accOptions()); err != nil {
					panic(err)
				}
			}
			if err == nil {
				if e.end != nil {
					err = b.finishShard(acc, e.end)
					acc = nil
				} else {
					err = acc.AddBatch(e.seq, e.rows, e.cols, e.w)
				}
				if err != nil {
					cancel()
				}
			}
			e.end = nil
			epool <- e
		}
		accDone <- err
	}()
	var s Summary
	var st *shardState
	var seq uint64 // batches of the shard
	size := b.shardEvents()
	endShard := func() {
		e := <-epool
		e.end = st
		ech <- e
		s.add(&st.sum)
		st = nil
	}
	consume := func(bt *batch) error {
		if k := bt.start / size; st != nil && st.lo/size != k {
			endShard()
		}
		if st == nil {
			st = b.newShard(bt.start / size * size)
			seq = 0
		}
		st.hi = bt.start + int64(bt.n)
		st.sum.Events += int64(bt.n)
		e := <-epool
		e.seq = seq
		seq++
		e.rows, bt.erows = bt.erows, e.rows[:0]
		e.cols, bt.ecols = bt.ecols, e.cols[:0]
		e.w, bt.ew = bt.ew, e.w[:0]
		ech <- e
		sm := &st.sum
		for k := 0; k < bt.n; k++ {
			w := bt.w[k]
			t, r := bt.truth[k], bt.reco[k]
			if r == codeOutside {
				sm.OutsideReco++
			}
			switch {
			case t >= 0:
				g := &st.gen[t]
				g[0] += w
				g[1] += w * w
				if r >= 0 {
					sm.Entries++
				} else {
					sm.Misses++
				}
			default:
				if t == codeOutside {
					sm.OutsideTruth++
				}
				if r >= 0 {
					f := &st.fake[r]
					f[0] += w
					f[1] += w * w
					sm.Fakes++
				}
			}
			if withDiag {
				if d := bt.diag[k]; d >= 0 {
					p := &st.gen[d]
					p[3] += w
					if d == t {
						p[2] += w
					}
				}
			}
		}
		return nil
	}
	_, _, err := stream(ctx, &sim.Sample, read, size, opt, newWork, consume)
	if err == nil && st != nil {
		endShard()
	}
	close(ech)
	if aerr := <-accDone; aerr != nil && err == nil || errors.Is(err, context.Canceled) && aerr != nil {
		err = aerr
	}
	return s, err
}

// Build returns the built response: the partials of every shard merged
// in shard order. The Builder must not be used afterwards.
func (b *Builder) Build() (*Built, error) {
	m := b.merger
	b.merger = nil
	return m.Built()
}

// Histogram is a reco-level histogram filled from events (data, or a
// background sample).
type Histogram struct {
	// Values and SumW2 are the sums of weights and of squared weights
	// per bin of the scheme.
	Values, SumW2 []float64
	// Events is the number of events read, Selected the number passing
	// the selection, and Outside the number of those outside the scheme;
	// OutsideWeight is the sum of their weights.
	Events, Selected, Outside int64
	OutsideWeight             float64
}

// NewHistogram returns an empty histogram over a scheme of n bins.
func NewHistogram(n int) *Histogram {
	return &Histogram{Values: make([]float64, n), SumW2: make([]float64, n)}
}

// Add streams the events of s, located in scheme with the observables
// and selection of l, into the histogram. Sums are formed in event
// order, so the result does not depend on the number of workers.
func (h *Histogram) Add(ctx context.Context, s *Sample, l *Level, scheme Locator, opt *Options) error {
	if scheme.Len() != len(h.Values) {
		panic("response: histogram and scheme sizes differ")
	}
	newWork := func() func(*scratch, *batch) error {
		weight, lv := instantiate(s.Weight), l.instantiate()
		return func(sc *scratch, bt *batch) error {
			if err := evalWeights(s, weight, bt); err != nil {
				return err
			}
			sc.locate(bt.reco, lv, scheme, bt.cols, bt.n)
			return nil
		}
	}
	var (
		sel, out int64
		outW     float64
	)
	consume := func(bt *batch) error {
		for k := 0; k < bt.n; k++ {
			switch r := bt.reco[k]; {
			case r >= 0:
				w := bt.w[k]
				h.Values[r] += w
				h.SumW2[r] += w * w
				sel++
			case r == codeOutside:
				sel++
				out++
				outW += bt.w[k]
			}
		}
		return nil
	}
	n, _, err := stream(ctx, s, s.Read, 0, opt, newWork, consume)
	h.Events += n
	h.Selected += sel
	h.Outside += out
	h.OutsideWeight += outW
	return err
}

func instantiate(e Expr) Evaluator {
	if e == nil {
		return nil
	}
	return e()
}
