package response

import (
	"context"
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// memoryRange streams the events [lo, hi) of in-memory columns in
// batches of the given size.
func memoryRange(cols [][]float64, size int) func(context.Context, int64, int64, func(int64, int, [][]float64) error) error {
	return func(ctx context.Context, lo, hi int64, fn func(int64, int, [][]float64) error) error {
		hi = min(hi, int64(len(cols[0])))
		part := make([][]float64, len(cols))
		for a := lo; a < hi; a += int64(size) {
			b := min(a+int64(size), hi)
			for c := range cols {
				part[c] = cols[c][a:b]
			}
			if err := fn(a, int(b-a), part); err != nil {
				return err
			}
		}
		return nil
	}
}

// unevenEvents is randomEvents with a reco selection whose efficiency
// changes along the sample (from 20% to 100%), so that the shards hold
// very different numbers of migration entries.
func unevenEvents(n int, seed uint64) [][]float64 {
	cols := randomEvents(n, seed)
	for k := range cols[6] {
		if float64(k%977)/977 > 0.2+0.8*float64(k)/float64(n) {
			cols[6][k] = 0
		}
	}
	return cols
}

// shardReference is the definition the builder must reproduce, written
// independently: per shard, a plain loop over its events in order (one
// sum per cell starting from the shard's first entry); the shards are
// then added in shard order, each cell's sum starting from the first
// shard that holds it (an independent implementation written in the
// test).
func shardReference(samples [][][]float64, size int, truth, reco Locator) (gen []float64, cells map[[2]int]float64, w2 map[[2]int]float64) {
	gen = make([]float64, truth.Len())
	cells, w2 = map[[2]int]float64{}, map[[2]int]float64{}
	for _, cols := range samples {
		n := len(cols[0])
		for lo := 0; lo < n; lo += size {
			g := make([]float64, truth.Len())
			sc, s2 := map[[2]int]float64{}, map[[2]int]float64{}
			for k := lo; k < min(lo+size, n); k++ {
				w := cols[4][k]
				t, r := -1, -1
				if cols[5][k] != 0 {
					t = truth.Locate([]float64{cols[0][k], cols[1][k]})
				}
				if cols[6][k] != 0 {
					r = reco.Locate([]float64{cols[2][k], cols[3][k]})
				}
				if t >= 0 {
					g[t] += w
					if r >= 0 {
						key := [2]int{r, t}
						if _, ok := sc[key]; ok {
							sc[key] += w
							s2[key] += w * w
						} else {
							sc[key], s2[key] = w, w*w
						}
					}
				}
			}
			for j := range gen {
				gen[j] += g[j]
			}
			for key, v := range sc {
				if _, ok := cells[key]; ok {
					cells[key] += v
					w2[key] += s2[key]
				} else {
					cells[key], w2[key] = v, s2[key]
				}
			}
		}
	}
	return gen, cells, w2
}

func sameBuilt(t *testing.T, what string, a, b *Built) {
	t.Helper()
	bits := func(x, y []float64) bool {
		return slices.EqualFunc(x, y, func(p, q float64) bool { return math.Float64bits(p) == math.Float64bits(q) })
	}
	if !bits(a.Migrations.Values(), b.Migrations.Values()) || !bits(a.Migrations.SumW2(), b.Migrations.SumW2()) ||
		!slices.Equal(a.Migrations.RowIdx(), b.Migrations.RowIdx()) || !slices.Equal(a.Migrations.ColPtr(), b.Migrations.ColPtr()) {
		t.Fatalf("%s: migration matrices differ", what)
	}
	if !bits(a.Generated, b.Generated) || !bits(a.GeneratedSumW2, b.GeneratedSumW2) || !bits(a.Fakes, b.Fakes) ||
		!bits(a.FakesSumW2, b.FakesSumW2) || !bits(a.Diagonal, b.Diagonal) || !bits(a.RecoInTruth, b.RecoInTruth) {
		t.Fatalf("%s: histograms differ", what)
	}
	sa, sb := a.Summary, b.Summary
	if sa.Events != sb.Events || sa.Entries != sb.Entries || sa.Misses != sb.Misses || sa.Fakes != sb.Fakes ||
		sa.NegativeCellCount != sb.NegativeCellCount || !slices.Equal(sa.NegativeCells, sb.NegativeCells) ||
		!slices.Equal(sa.NegativeGenerated, sb.NegativeGenerated) {
		t.Fatalf("%s: summaries differ: %+v and %+v", what, sa, sb)
	}
}

// TestShardMergeSameBits: a simulation of K shards (K = 1, 2, 7, 64;
// two samples, uneven entry counts from the selection) built in one
// Builder equals the per-shard definition (shardReference), and equals
// the partials built separately, range by range in groups of shards on
// other Builders, merged in shard order, bit for bit.
func TestShardMergeSameBits(t *testing.T) {
	const size = 500
	truth, reco := grid2D{5, 4}, grid2D{10, 8}
	for _, k := range []int{1, 2, 7, 64} {
		// K shards: K-2 (at least 1) in the first sample, the rest in the second.
		k0 := max(k-2, 1)
		samples := [][][]float64{unevenEvents((k0-1)*size+317, uint64(k))}
		if k > k0 {
			samples = append(samples, unevenEvents((k-k0-1)*size+size, uint64(100+k)))
		}
		sim := func(s int, batch int) *Simulation {
			m := randomSimulation(samples[s], batch)
			m.ReadRange = memoryRange(samples[s], batch)
			return m
		}
		whole := NewBuilder(truth, reco)
		whole.ShardEvents = size
		for s := range samples {
			if _, err := whole.Add(context.Background(), sim(s, 333), &Options{Workers: 2}); err != nil {
				t.Fatal(err)
			}
		}
		r, err := whole.Build()
		if err != nil {
			t.Fatal(err)
		}
		gen, cells, w2 := shardReference(samples, size, truth, reco)
		if !slices.Equal(r.Generated, gen) || r.Migrations.NNZ() != len(cells) {
			t.Fatalf("K=%d: generated or number of cells differ from the per-shard loops", k)
		}
		for rc, v := range cells {
			if got := r.Migrations.At(rc[0], rc[1]); math.Float64bits(got) != math.Float64bits(v) {
				t.Fatalf("K=%d: A%v = %v, per-shard loops %v", k, rc, got, v)
			}
		}
		cp, ri, sw2 := r.Migrations.ColPtr(), r.Migrations.RowIdx(), r.Migrations.SumW2()
		for j := 0; j < truth.Len(); j++ {
			for p := cp[j]; p < cp[j+1]; p++ {
				if sw2[p] != w2[[2]int{ri[p], j}] {
					t.Fatalf("K=%d: squared weights of (%d,%d) differ", k, ri[p], j)
				}
			}
		}
		// Built in groups of g shards with ranged reads, merged in order.
		for _, g := range []int{1, 3, k} {
			var parts []*Built
			var ranges [][3]int64
			for s := range samples {
				rs := ShardRanges(int64(len(samples[s][0])), size)
				for q := 0; q < len(rs); q += g {
					b := NewBuilder(truth, reco)
					b.ShardEvents = size
					b.OnShard = func(_ int, lo, hi int64, p *Built) error {
						parts = append(parts, p)
						ranges = append(ranges, [3]int64{int64(s), lo, hi})
						return nil
					}
					lo, hi := rs[q][0], rs[min(q+g, len(rs))-1][1]
					if _, err := b.AddRange(context.Background(), sim(s, 128), lo, hi, &Options{Workers: 1}); err != nil {
						t.Fatal(err)
					}
				}
			}
			if len(parts) != k {
				t.Fatalf("K=%d groups of %d: %d partials", k, g, len(parts))
			}
			m := NewMerger(truth.Len(), reco.Len())
			for _, p := range parts {
				if err := m.Add(p); err != nil {
					t.Fatal(err)
				}
			}
			mr, err := m.Built()
			if err != nil {
				t.Fatal(err)
			}
			sameBuilt(t, "merged partials", r, mr)
		}
	}
}

// TestShardEdges: an empty range gives one empty shard; a Merger with
// negative cells reports them after the merge only (a cell negative in
// one shard and positive in total is not reported); mismatched partials
// are refused.
func TestShardEdges(t *testing.T) {
	if got := ShardRanges(0, 10); !slices.Equal(got, [][2]int64{{0, 0}}) {
		t.Errorf("ShardRanges(0) = %v", got)
	}
	if got := ShardRanges(25, 10); !slices.Equal(got, [][2]int64{{0, 10}, {10, 20}, {20, 25}}) {
		t.Errorf("ShardRanges(25, 10) = %v", got)
	}
	cols := [][]float64{{0.5, 0.5}, {0.5, 0.5}, {0.5, 0.5}, {0.5, 0.5}, {-1, 3}, {1, 1}, {1, 1}}
	truth, reco := grid2D{1, 1}, grid2D{1, 1}
	var parts []*Built
	b := NewBuilder(truth, reco)
	b.ShardEvents = 1
	b.OnShard = func(_ int, lo, hi int64, p *Built) error { parts = append(parts, p); return nil }
	s := randomSimulation(cols, 1)
	s.ReadRange = memoryRange(cols, 1)
	if _, err := b.AddRange(context.Background(), s, 0, 2, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := b.AddRange(context.Background(), s, 2, 2, nil); err != nil {
		t.Fatal(err)
	}
	if len(parts) != 3 || parts[2].Migrations.NNZ() != 0 || parts[2].Summary.Events != 0 {
		t.Fatalf("%d partials, the last %+v", len(parts), parts[len(parts)-1])
	}
	m := NewMerger(1, 1)
	for _, p := range parts {
		if err := m.Add(p); err != nil {
			t.Fatal(err)
		}
	}
	r, err := m.Built()
	if err != nil {
		t.Fatal(err)
	}
	if r.Migrations.At(0, 0) != 2 || r.Summary.NegativeCellCount != 0 || r.Summary.Events != 2 {
		t.Errorf("merged: A = %v, %d negative cells, %d events; want 2, 0, 2", r.Migrations.At(0, 0), r.Summary.NegativeCellCount, r.Summary.Events)
	}
	m = NewMerger(1, 1)
	m.Add(parts[0])
	if r, _ := m.Built(); r.Summary.NegativeCellCount != 1 || r.Summary.NegativeCells[0].Value != -1 {
		t.Errorf("the negative shard alone: %+v", r.Summary)
	}
	m = NewMerger(2, 1)
	if err := m.Add(parts[0]); err == nil || !strings.Contains(err.Error(), "truth") {
		t.Errorf("a partial of other sizes: %v", err)
	}
	empty, _ := sparse.NewMatrix(1, 1, []int{0, 0}, nil, nil, nil)
	m = NewMerger(1, 1)
	m.Add(parts[0])
	if err := m.Add(&Built{Migrations: empty, Generated: []float64{0}, GeneratedSumW2: []float64{0}, Fakes: []float64{0}, FakesSumW2: []float64{0}}); err == nil {
		t.Error("a partial without purity histograms after one with them accepted")
	}
}

// TestBuilderMemoryLimit: a build whose shards' accumulation needs more
// than MemoryLimit stops with a *sparse.MemoryError naming the limit; a
// Merger whose merge needs more than its MemoryLimit by MergeBytes (the
// documented formula, written out here again: 48 bytes per merged and
// pending cell, 8 per bin of the four truth and two reco histograms)
// stops the same way; limits that hold them change nothing.
func TestBuilderMemoryLimit(t *testing.T) {
	const size = 500
	truth, reco := grid2D{5, 4}, grid2D{10, 8}
	nt, nr := truth.Len(), reco.Len()
	cols := unevenEvents(20*size, 7)
	var parts []*Built
	build := func(limit int64) (*Built, error) {
		b := NewBuilder(truth, reco)
		b.ShardEvents, b.MemoryLimit = size, limit
		if _, err := b.Add(context.Background(), randomSimulation(cols, 333), &Options{Workers: 2}); err != nil {
			return nil, err
		}
		return b.Build()
	}
	ref, err := build(0)
	if err != nil {
		t.Fatal(err)
	}
	r, err := build(sparse.AccumulatorBytes(size, nt*nr, nt, nil, 8, size) + MergeBytes(nt*nr, 16*nt*nr, nt, nr))
	if err != nil {
		t.Fatal(err)
	}
	sameBuilt(t, "under a sufficient limit", ref, r)
	var me *sparse.MemoryError
	if _, err := build(16 << 10); !errors.As(err, &me) || me.Limit != 16<<10 {
		t.Fatalf("build under 16 KiB: %v, want a *sparse.MemoryError of the accumulation", err)
	}

	if got, want := MergeBytes(100, 30, nt, nr), int64(48*130+8*(4*nt+2*nr)); got != want {
		t.Fatalf("MergeBytes = %d, want %d", got, want)
	}
	b := NewBuilder(truth, reco)
	b.ShardEvents = size
	b.OnShard = func(_ int, _, _ int64, p *Built) error { parts = append(parts, p); return nil }
	if _, err := b.Add(context.Background(), randomSimulation(cols, 333), &Options{Workers: 2}); err != nil {
		t.Fatal(err)
	}
	merge := func(limit int64) (*Built, error) {
		g := NewMerger(nt, nr)
		g.MemoryLimit = limit
		for _, p := range parts {
			if err := g.Add(p); err != nil {
				return nil, err
			}
		}
		return g.Built()
	}
	// 20 shards: the first merge has 16 pending partials, the second the
	// merged matrix and the 4 others, fewer cells here.
	var first int
	for _, p := range parts[:16] {
		first += p.Migrations.NNZ()
	}
	r, err = merge(MergeBytes(0, first, nt, nr))
	if err != nil {
		t.Fatalf("merge under the first merge's bytes: %v", err)
	}
	sameBuilt(t, "merged under a limit", ref, r)
	limit := MergeBytes(0, first, nt, nr) - 1
	_, err = merge(limit)
	if !errors.As(err, &me) || me.Limit != limit || me.Bytes != limit+1 || me.Cells != first || !strings.Contains(err.Error(), "memory limit") {
		t.Fatalf("merge under %d bytes: %v, want a *sparse.MemoryError of %d cells above that limit", limit, err, first)
	}
}
