package response

import (
	"fmt"

	"github.com/desmear/desmear/sparse"
)

// DefaultShardEvents is the number of events of a shard: the unit of
// response building, a fixed range of events of one simulated sample.
const DefaultShardEvents = 1 << 20

// Shard identifies one shard: the events [Lo, Hi) of a simulated sample
// (the Sample-th of the analysis, in File, whose content has the SHA-256
// SHA256).
type Shard struct {
	Sample int    `json:"sample"`
	File   string `json:"file"`
	SHA256 string `json:"sha256"`
	Lo     int64  `json:"lo"`
	Hi     int64  `json:"hi"`
}

func (s Shard) String() string {
	return fmt.Sprintf("%s events %d to %d", s.File, s.Lo, s.Hi)
}

// ShardRanges returns the event ranges of the shards of a sample of n
// events with size events per shard: [k·size, min((k+1)·size, n)) for
// k = 0, 1, ...; a sample without events has one empty shard [0, 0).
func ShardRanges(n, size int64) [][2]int64 {
	if size <= 0 {
		panic("response: shard size must be positive")
	}
	if n <= 0 {
		return [][2]int64{{0, 0}}
	}
	var out [][2]int64
	for lo := int64(0); lo < n; lo += size {
		out = append(out, [2]int64{lo, min(lo+size, n)})
	}
	return out
}

// mergeGroup is the number of partial matrices summed at once.
const mergeGroup = 16

// Merger merges partial responses (the responses of shards) in the order
// they are added: every cell of the migration matrix and every bin of
// the histograms is the sum of the partials' values in that order
// (sparse.Sum), and the counts are added. Merging the partials of all
// shards in shard order gives the response of the whole simulation, the
// same bits however the shards were built.
type Merger struct {
	// MemoryLimit, when positive, bounds MergeBytes at every merge of
	// the pending partial matrices: beyond it Add and Built return a
	// *sparse.MemoryError. It does not change the result.
	MemoryLimit int64

	nt, nr   int
	n        int
	withDiag bool
	m        *sparse.Matrix
	pending  []*sparse.Matrix
	r        Built
}

// NewMerger returns an empty Merger for responses of nt truth and nr
// reco bins.
func NewMerger(nt, nr int) *Merger {
	return &Merger{nt: nt, nr: nr, r: Built{
		Generated: make([]float64, nt), GeneratedSumW2: make([]float64, nt),
		Fakes: make([]float64, nr), FakesSumW2: make([]float64, nr)}}
}

// Add merges the partial response p (the next shard). It returns an
// error if p's sizes differ from the Merger's, or if it carries purity
// histograms where the earlier partials did not or the reverse. p's cell
// lists are ignored; p must not be changed until Built is called.
func (g *Merger) Add(p *Built) error {
	if p.TruthBins() != g.nt || p.RecoBins() != g.nr || len(p.GeneratedSumW2) != g.nt || len(p.FakesSumW2) != g.nr {
		return fmt.Errorf("response: a partial response of %d truth and %d reco bins, want %d and %d", p.TruthBins(), p.RecoBins(), g.nt, g.nr)
	}
	if r, c := p.Migrations.Dims(); r != g.nr || c != g.nt {
		return fmt.Errorf("response: a partial migration matrix of %d×%d, want %d×%d", r, c, g.nr, g.nt)
	}
	withDiag := p.Diagonal != nil
	if withDiag && (len(p.Diagonal) != g.nt || len(p.RecoInTruth) != g.nt) {
		return fmt.Errorf("response: partial purity histograms of the wrong length")
	}
	if err := g.start(withDiag); err != nil {
		return err
	}
	addTo(g.r.Generated, p.Generated)
	addTo(g.r.GeneratedSumW2, p.GeneratedSumW2)
	addTo(g.r.Fakes, p.Fakes)
	addTo(g.r.FakesSumW2, p.FakesSumW2)
	if withDiag {
		addTo(g.r.Diagonal, p.Diagonal)
		addTo(g.r.RecoInTruth, p.RecoInTruth)
	}
	g.r.Summary.add(&p.Summary)
	return g.push(p.Migrations)
}

// addShard merges a shard built here, its histograms side by side, as Add
// merges its partial response: the same sums in the same order.
func (g *Merger) addShard(m *sparse.Matrix, st *shardState) error {
	if err := g.start(st.withDiag); err != nil {
		return err
	}
	gen, gen2 := g.r.Generated[:len(st.gen)], g.r.GeneratedSumW2[:len(st.gen)]
	for j, v := range st.gen {
		gen[j] += v[0]
		gen2[j] += v[1]
	}
	fake, fake2 := g.r.Fakes[:len(st.fake)], g.r.FakesSumW2[:len(st.fake)]
	for i, v := range st.fake {
		fake[i] += v[0]
		fake2[i] += v[1]
	}
	if st.withDiag {
		dg, rit := g.r.Diagonal[:len(st.gen)], g.r.RecoInTruth[:len(st.gen)]
		for j, v := range st.gen {
			dg[j] += v[2]
			rit[j] += v[3]
		}
	}
	g.r.Summary.add(&st.sum)
	return g.push(m)
}

// start counts one more partial, with purity histograms or without, and
// refuses a mix.
func (g *Merger) start(withDiag bool) error {
	if g.n == 0 {
		g.withDiag = withDiag
		if withDiag {
			g.r.Diagonal, g.r.RecoInTruth = make([]float64, g.nt), make([]float64, g.nt)
		}
	} else if withDiag != g.withDiag {
		return fmt.Errorf("response: partial responses with and without purity histograms")
	}
	g.n++
	return nil
}

// push queues a partial migration matrix for the merge.
func (g *Merger) push(m *sparse.Matrix) error {
	g.pending = append(g.pending, m)
	if len(g.pending) == mergeGroup {
		return g.flush()
	}
	return nil
}

func addTo(dst, src []float64) {
	for i, v := range src {
		dst[i] += v
	}
}

// MergeBytes returns the memory a Merger of nt truth and nr reco bins
// holds while it merges partial matrices of pending cells in all into
// its merged matrix of merged cells: both, and the new merged matrix
// (sized for its inputs), at 24 bytes per cell (row index, value, sum
// of squared weights), and the merged histograms:
//
//	48·(merged + pending) + 8·(4·nt + 2·nr)
//
// At most mergeGroup (16) partials are pending, so with shards of at most
// c cells pending ≤ 16·c.
func MergeBytes(merged, pending, nt, nr int) int64 {
	return 48*int64(merged+pending) + 8*int64(4*nt+2*nr)
}

// flush sums the pending matrices into the merged one.
func (g *Merger) flush() error {
	if len(g.pending) == 0 {
		return nil
	}
	ms := g.pending
	if g.m != nil {
		ms = append([]*sparse.Matrix{g.m}, g.pending...)
	}
	if g.MemoryLimit > 0 {
		var merged, pending int
		for _, m := range g.pending {
			pending += m.NNZ()
		}
		if g.m != nil {
			merged = g.m.NNZ()
		}
		if b := MergeBytes(merged, pending, g.nt, g.nr); b > g.MemoryLimit {
			return &sparse.MemoryError{Rows: g.nr, Cols: g.nt, Cells: merged + pending, Bytes: b, Limit: g.MemoryLimit}
		}
	}
	m, err := sparse.Sum(ms...)
	if err != nil {
		return fmt.Errorf("response: merging partial responses: %w", err)
	}
	g.m = m
	clear(g.pending)
	g.pending = g.pending[:0]
	return nil
}

// Built returns the merged response, with the negative cells and the
// negative generated sums of the merged response listed in its Summary.
// The Merger must not be used afterwards.
func (g *Merger) Built() (*Built, error) {
	if err := g.flush(); err != nil {
		return nil, err
	}
	if g.m == nil {
		m, err := sparse.NewMatrix(g.nr, g.nt, make([]int, g.nt+1), nil, nil, []float64{})
		if err != nil {
			panic(err)
		}
		g.m = m
	}
	r := g.r
	r.Migrations = g.m
	s := &r.Summary
	s.NegativeCellCount, s.NegativeCells, s.NegativeGenerated = 0, nil, nil
	cp, ri, v := r.Migrations.ColPtr(), r.Migrations.RowIdx(), r.Migrations.Values()
	for j := 0; j < g.nt; j++ {
		for p := cp[j]; p < cp[j+1]; p++ {
			if v[p] < 0 {
				s.NegativeCellCount++
				if len(s.NegativeCells) < sparse.MaxReportedCells {
					s.NegativeCells = append(s.NegativeCells, Cell{Reco: ri[p], Truth: j, Value: v[p]})
				}
			}
		}
	}
	for j, x := range r.Generated {
		if x < 0 {
			s.NegativeGenerated = append(s.NegativeGenerated, j)
		}
	}
	g.m, g.pending = nil, nil
	return &r, nil
}
