package response

import (
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"sort"
	"strings"
	"testing"

	"github.com/desmear/desmear/binning"
)

// edges1D is a 1-D scheme for tests, with the flattening convention of
// the binning package: in-range bins first, then the underflow and the
// overflow when switched on; a value on an edge belongs to the bin above.
type edges1D struct {
	edges       []float64
	under, over bool
}

func (e edges1D) Len() int {
	n := len(e.edges) - 1
	if e.under {
		n++
	}
	if e.over {
		n++
	}
	return n
}

func (e edges1D) Locate(x []float64) int {
	v := x[0]
	n := len(e.edges) - 1
	switch {
	case v != v:
		return -1
	case v < e.edges[0]:
		if e.under {
			return n
		}
		return -1
	case v >= e.edges[n]:
		if e.over {
			if e.under {
				return n + 1
			}
			return n
		}
		return -1
	}
	return sort.Search(len(e.edges), func(i int) bool { return e.edges[i] > v }) - 1
}

func boolInt(b bool) int {
	if b {
		return 1
	}
	return 0
}

// grid2D is a 2-D rectangular scheme without flows, row-major.
type grid2D struct{ nx, ny int }

func (g grid2D) Len() int { return g.nx * g.ny }
func (g grid2D) Locate(x []float64) int {
	if !(x[0] >= 0 && x[0] < 1 && x[1] >= 0 && x[1] < 1) {
		return -1
	}
	return int(x[0]*float64(g.nx))*g.ny + int(x[1]*float64(g.ny))
}

func col(i int) Expr {
	return Func(func(dst []float64, cols [][]float64) { copy(dst, cols[i]) })
}

// memory streams in-memory columns in batches of the given size.
func memory(cols [][]float64, size int) ReadFunc {
	return func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
		n := len(cols[0])
		part := make([][]float64, len(cols))
		for lo := 0; lo < n; lo += size {
			if err := ctx.Err(); err != nil {
				return err
			}
			hi := min(lo+size, n)
			for c := range cols {
				part[c] = cols[c][lo:hi]
			}
			if err := fn(int64(lo), hi-lo, part); err != nil {
				return err
			}
		}
		return nil
	}
}

// handEvents is a list whose fate is known event by event (see the
// comments); columns: truth x, reco x, weight, truth pass, reco pass.
var handEvents = [][]float64{
	//   t     r     w  pt pr
	{0.5, 0.5, 1, 1, 1},    // 0: migration (reco 0, truth 0)
	{0.5, 1.5, 2, 1, 1},    // 1: migration (1, 0)
	{1.5, 1.5, 1, 1, 0},    // 2: miss (fails reco selection)
	{2.5, -1, 1, 1, 1},     // 3: miss, reco outside (no reco underflow)
	{5, 2.5, 1, 1, 1},      // 4: migration (2, 3): truth overflow is a bin
	{-1, 0.5, 3, 1, 1},     // 5: fake, truth outside (no truth underflow)
	{0.5, 2.5, 1, 0, 1},    // 6: fake (fails truth selection)
	{0.5, 0.5, -0.5, 1, 1}, // 7: migration (0, 0), negative weight
	{1.5, 2.5, -2, 1, 1},   // 8: migration (2, 1): a negative cell
	{-1, 5, 1, 1, 1},       // 9: outside at both levels
	{1.5, 1.5, 1, 0, 0},    // 10: fails both selections
}

func handSimulation(batch int) *Simulation {
	cols := make([][]float64, 5)
	for _, ev := range handEvents {
		for c := range cols {
			cols[c] = append(cols[c], ev[c])
		}
	}
	return &Simulation{
		Sample:      Sample{Name: "hand", Read: memory(cols, batch), Events: int64(len(handEvents)), Weight: col(2)},
		Truth:       Level{Observables: []Expr{col(0)}, Select: col(3)},
		Reco:        Level{Observables: []Expr{col(1)}, Select: col(4)},
		RecoInTruth: []int{0},
	}
}

var (
	handTruth = edges1D{edges: []float64{0, 1, 2, 3}, over: true} // bins 0,1,2 + overflow 3
	handReco  = edges1D{edges: []float64{0, 1, 2, 3}}             // bins 0,1,2, no flows
)

func TestHandBuiltEvents(t *testing.T) {
	for _, batch := range []int{1, 3, 100} {
		for _, workers := range []int{1, 2, 4} {
			b := NewBuilder(handTruth, handReco)
			if _, err := b.Add(context.Background(), handSimulation(batch), &Options{Workers: workers}); err != nil {
				t.Fatal(err)
			}
			r, err := b.Build()
			if err != nil {
				t.Fatal(err)
			}
			s := r.Summary
			// Expected counts, worked out event by event in handEvents.
			if s.Events != 11 || s.Entries != 5 || s.Misses != 2 || s.Fakes != 2 || s.OutsideTruth != 2 || s.OutsideReco != 2 {
				t.Fatalf("batch %d workers %d: summary %+v", batch, workers, s)
			}
			wantG := []float64{1 + 2 - 0.5, 1 - 2, 1, 1}
			wantG2 := []float64{1 + 4 + 0.25, 1 + 4, 1, 1}
			if !slices.Equal(r.Generated, wantG) || !slices.Equal(r.GeneratedSumW2, wantG2) {
				t.Errorf("generated %v sumw2 %v, want %v %v", r.Generated, r.GeneratedSumW2, wantG, wantG2)
			}
			if want := []float64{3, 0, 1}; !slices.Equal(r.Fakes, want) {
				t.Errorf("fakes %v, want %v", r.Fakes, want)
			}
			if want := []float64{9, 0, 1}; !slices.Equal(r.FakesSumW2, want) {
				t.Errorf("fakes sumw2 %v, want %v", r.FakesSumW2, want)
			}
			cells := map[[2]int][2]float64{{0, 0}: {0.5, 1.25}, {1, 0}: {2, 4}, {2, 3}: {1, 1}, {2, 1}: {-2, 4}}
			m := r.Migrations
			if m.NNZ() != len(cells) {
				t.Errorf("nnz %d, want %d", m.NNZ(), len(cells))
			}
			for rc, want := range cells {
				if got := m.At(rc[0], rc[1]); got != want[0] {
					t.Errorf("A[%d][%d] = %v, want %v", rc[0], rc[1], got, want[0])
				}
			}
			cp, ri, sw := m.ColPtr(), m.RowIdx(), m.SumW2()
			for j := 0; j < 4; j++ {
				for k := cp[j]; k < cp[j+1]; k++ {
					if want := cells[[2]int{ri[k], j}][1]; sw[k] != want {
						t.Errorf("sumw2[%d][%d] = %v, want %v", ri[k], j, sw[k], want)
					}
				}
			}
			if want := []Cell{{Reco: 2, Truth: 1, Value: -2}}; !slices.Equal(s.NegativeCells, want) {
				t.Errorf("negative cells %v, want %v", s.NegativeCells, want)
			}
			if want := []int{1}; !slices.Equal(s.NegativeGenerated, want) {
				t.Errorf("negative generated %v, want %v", s.NegativeGenerated, want)
			}
			// Reco observables in the truth scheme: see handEvents.
			if want := []float64{0.5, 0, 0, 0}; !slices.Equal(r.Diagonal, want) {
				t.Errorf("diagonal %v, want %v", r.Diagonal, want)
			}
			if want := []float64{1 + 3 - 0.5, 2, 1 + 1 - 2, 1}; !slices.Equal(r.RecoInTruth, want) {
				t.Errorf("reco in truth %v, want %v", r.RecoInTruth, want)
			}
			eff := r.Efficiency(nil)
			if want := []float64{1, 2, 0, 1}; !slices.Equal(eff, want) {
				t.Errorf("efficiency %v, want %v", eff, want)
			}
			if p := r.Purity(nil); p[0] != 0.5/3.5 || !math.IsNaN(p[2]) {
				t.Errorf("purity %v", p)
			}
			if st := r.Stability(nil); st[0] != 0.5/2.5 || st[3] != 0 {
				t.Errorf("stability %v", st)
			}
		}
	}
}

// randomEvents returns columns (tx, ty, rx, ry, w, passT, passR) of n
// events: smeared 2-D points with some events outside both grids,
// negative weights and failed selections.
func randomEvents(n int, seed uint64) [][]float64 {
	rng := rand.New(rand.NewPCG(seed, 1))
	cols := make([][]float64, 7)
	for c := range cols {
		cols[c] = make([]float64, n)
	}
	for k := 0; k < n; k++ {
		tx, ty := rng.Float64()*1.1-0.05, rng.Float64()*1.1-0.05
		cols[0][k], cols[1][k] = tx, ty
		cols[2][k], cols[3][k] = tx+0.05*rng.NormFloat64(), ty+0.05*rng.NormFloat64()
		cols[4][k] = rng.ExpFloat64() * (1 - 1.2*float64(boolInt(rng.Float64() < 0.1)))
		cols[5][k] = float64(boolInt(rng.Float64() < 0.95))
		cols[6][k] = float64(boolInt(rng.Float64() < 0.8))
	}
	return cols
}

func randomSimulation(cols [][]float64, batch int) *Simulation {
	return &Simulation{
		Sample:      Sample{Name: "random", Read: memory(cols, batch), Events: int64(len(cols[0])), Weight: col(4)},
		Truth:       Level{Observables: []Expr{col(0), col(1)}, Select: col(5)},
		Reco:        Level{Observables: []Expr{col(2), col(3)}, Select: col(6)},
		RecoInTruth: []int{0, 1},
	}
}

// serialReference builds the same response with a plain loop over the
// events in order, the definition the pipeline must reproduce bit for
// bit (same summation order per cell).
func serialReference(cols [][]float64, truth, reco Locator) (gen, fake []float64, cellSums map[[2]int]float64) {
	gen = make([]float64, truth.Len())
	fake = make([]float64, reco.Len())
	cellSums = map[[2]int]float64{}
	for k := range cols[0] {
		w := cols[4][k]
		t, r := -1, -1
		if cols[5][k] != 0 {
			t = truth.Locate([]float64{cols[0][k], cols[1][k]})
		}
		if cols[6][k] != 0 {
			r = reco.Locate([]float64{cols[2][k], cols[3][k]})
		}
		switch {
		case t >= 0 && r >= 0:
			gen[t] += w
			cellSums[[2]int{r, t}] += w
		case t >= 0:
			gen[t] += w
		case r >= 0:
			fake[r] += w
		}
	}
	return gen, fake, cellSums
}

func TestSameBitsAnyWorkers(t *testing.T) {
	cols := randomEvents(30000, 7)
	truth, reco := grid2D{5, 4}, grid2D{10, 8}
	gen, fake, cellSums := serialReference(cols, truth, reco)
	var first *Built
	for _, cfg := range []struct{ workers, batch int }{{1, 1000}, {2, 1000}, {2, 777}, {3, 4096}, {1, 30000}} {
		b := NewBuilder(truth, reco)
		if _, err := b.Add(context.Background(), randomSimulation(cols, cfg.batch), &Options{Workers: cfg.workers}); err != nil {
			t.Fatal(err)
		}
		r, err := b.Build()
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(r.Generated, gen) || !slices.Equal(r.Fakes, fake) {
			t.Fatalf("%+v: generated or fakes differ from the serial loop", cfg)
		}
		if r.Migrations.NNZ() != len(cellSums) {
			t.Fatalf("%+v: nnz %d, want %d", cfg, r.Migrations.NNZ(), len(cellSums))
		}
		for rc, v := range cellSums {
			if got := r.Migrations.At(rc[0], rc[1]); got != v {
				t.Fatalf("%+v: A%v = %v, serial %v", cfg, rc, got, v)
			}
		}
		if first == nil {
			first = r
			continue
		}
		if !slices.Equal(r.Migrations.Values(), first.Migrations.Values()) ||
			!slices.Equal(r.Migrations.SumW2(), first.Migrations.SumW2()) ||
			!slices.Equal(r.Migrations.RowIdx(), first.Migrations.RowIdx()) ||
			!slices.Equal(r.Diagonal, first.Diagonal) || !slices.Equal(r.RecoInTruth, first.RecoInTruth) ||
			!slices.Equal(r.GeneratedSumW2, first.GeneratedSumW2) {
			t.Fatalf("%+v: result differs from 1 worker", cfg)
		}
	}
}

// Same binning at both levels: purity and stability then have their
// usual definitions (common practice, H1/ZEUS-style), which a direct
// count over the events reproduces.
func TestPurityStabilitySameBinning(t *testing.T) {
	cols := randomEvents(20000, 3)
	g := grid2D{6, 6}
	b := NewBuilder(g, g)
	if _, err := b.Add(context.Background(), randomSimulation(cols, 512), nil); err != nil {
		t.Fatal(err)
	}
	r, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	n := g.Len()
	diag, rec, gen := make([]float64, n), make([]float64, n), make([]float64, n)
	for k := range cols[0] {
		w := cols[4][k]
		ti, ri := -1, -1
		if cols[5][k] != 0 {
			ti = g.Locate([]float64{cols[0][k], cols[1][k]})
		}
		if cols[6][k] != 0 {
			ri = g.Locate([]float64{cols[2][k], cols[3][k]})
		}
		if ti >= 0 {
			gen[ti] += w
		}
		if ri >= 0 {
			rec[ri] += w
			if ri == ti {
				diag[ri] += w
			}
		}
	}
	p, s := r.Purity(nil), r.Stability(nil)
	for i := 0; i < n; i++ {
		if p[i] != diag[i]/rec[i] || s[i] != diag[i]/gen[i] {
			t.Errorf("bin %d: purity %v stability %v, want %v %v", i, p[i], s[i], diag[i]/rec[i], diag[i]/gen[i])
		}
		// For identical binnings the diagonal is the migration matrix's.
		if a := r.Migrations.At(i, i); a != diag[i] {
			t.Errorf("bin %d: A_ii %v, diagonal %v", i, a, diag[i])
		}
	}
}

func TestHistogram(t *testing.T) {
	cols := [][]float64{{0.5, 1.5, 1.5, 7, -3, 2.5}, {1, 1, 0, 1, 1, 1}, {2, 1, 1, 1, 1, 0.5}}
	h := NewHistogram(handReco.Len())
	s := &Sample{Name: "data", Read: memory(cols, 4), Weight: col(2)}
	l := &Level{Observables: []Expr{col(0)}, Select: col(1)}
	if err := h.Add(context.Background(), s, l, handReco, &Options{Workers: 2}); err != nil {
		t.Fatal(err)
	}
	if want := []float64{2, 1, 0.5}; !slices.Equal(h.Values, want) {
		t.Errorf("values %v, want %v", h.Values, want)
	}
	if want := []float64{4, 1, 0.25}; !slices.Equal(h.SumW2, want) {
		t.Errorf("sumw2 %v, want %v", h.SumW2, want)
	}
	if h.Events != 6 || h.Selected != 5 || h.Outside != 2 {
		t.Errorf("events %d selected %d outside %d", h.Events, h.Selected, h.Outside)
	}
}

func TestBadWeight(t *testing.T) {
	cols := [][]float64{{0.5, 0.5, 0.5}, {1, math.NaN(), 1}}
	h := NewHistogram(handReco.Len())
	s := &Sample{Name: "data.csv", Read: memory(cols, 2), Weight: col(1)}
	err := h.Add(context.Background(), s, &Level{Observables: []Expr{col(0)}}, handReco, nil)
	var ee *EventError
	if !errors.As(err, &ee) || ee.Event != 1 || ee.Sample != "data.csv" {
		t.Fatalf("got %v, want an error for event 1 of data.csv", err)
	}
}

func TestCancel(t *testing.T) {
	cols := randomEvents(10000, 1)
	ctx, cancel := context.WithCancel(context.Background())
	calls := 0
	opt := &Options{Workers: 2, Progress: func(done, total int64) {
		calls++
		if calls == 2 {
			cancel()
		}
	}}
	b := NewBuilder(grid2D{3, 3}, grid2D{3, 3})
	_, err := b.Add(ctx, randomSimulation(cols, 100), opt)
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("got %v, want context.Canceled", err)
	}
}

// Purity histograms with binning schemes, where reco bins inside one
// truth bin are mapped directly and the others located: the result must
// equal locating every event's reco values in the truth scheme.
func TestRecoInTruthDirectMap(t *testing.T) {
	truth := mustScheme(t, `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.3, 0.6, 1], overflow: true}
      - {name: y, edges: [0, 0.5, 1], underflow: true}
`)
	// Reco bins: some inside one truth bin, some straddling (0.25-0.35,
	// 0.45-0.55), flows on.
	reco := mustScheme(t, `regions:
  - name: r
    axes:
      - {name: x, edges: [0, 0.15, 0.25, 0.35, 0.6, 0.8, 1], underflow: true, overflow: true}
      - {name: y, edges: [0, 0.25, 0.45, 0.55, 1], underflow: true, overflow: true}
`)
	cols := randomEvents(20000, 11)
	b := NewBuilder(truth, reco)
	if _, err := b.Add(context.Background(), randomSimulation(cols, 999), &Options{Workers: 2}); err != nil {
		t.Fatal(err)
	}
	r, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	diag, rit := make([]float64, truth.Len()), make([]float64, truth.Len())
	for k := range cols[0] {
		w := cols[4][k]
		ti := -1
		if cols[5][k] != 0 {
			ti = truth.Locate([]float64{cols[0][k], cols[1][k]})
		}
		if cols[6][k] == 0 {
			continue
		}
		if d := truth.Locate([]float64{cols[2][k], cols[3][k]}); d >= 0 {
			rit[d] += w
			if d == ti {
				diag[d] += w
			}
		}
	}
	if !slices.Equal(r.Diagonal, diag) || !slices.Equal(r.RecoInTruth, rit) {
		t.Errorf("diagonal %v\nwant     %v\nreco in truth %v\nwant          %v", r.Diagonal, diag, r.RecoInTruth, rit)
	}
	m := newDiagMap(truth, reco, []int{0, 1})
	direct, split := 0, 0
	for _, c := range m.cells {
		switch {
		case c.truth >= 0 && c.split == 0:
			direct++
		case c.truth >= 0:
			split++
		}
	}
	// 6×4 in-range reco bins; x bin [0.25,0.35) and y bin [0.45,0.55)
	// straddle truth edges: 5×3 = 15 lie inside one truth bin, 3+5 = 8
	// straddle one truth edge (one comparison), 1 straddles two. Of the
	// 24 reco flow bins, those in a switched-on truth flow bin: the x
	// overflow with the y underflow and the 3 y bins inside one truth bin
	// (4), the y underflow with the 5 x bins inside one truth bin (5).
	if direct != 15+9 || split != 8 {
		t.Errorf("%d reco bins mapped directly and %d split, want 24 and 8", direct, split)
	}
}

func mustScheme(t *testing.T, src string) *binning.Scheme {
	t.Helper()
	s, err := binning.Decode(strings.NewReader(src), "test.yaml")
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// Problems met while building a response are errors that say where.
func TestBuilderErrors(t *testing.T) {
	// A non-finite weight names the sample and the event.
	sim := handSimulation(4)
	cols := make([][]float64, 5)
	for _, ev := range handEvents {
		for c := range cols {
			cols[c] = append(cols[c], ev[c])
		}
	}
	cols[2][6] = math.Inf(1)
	sim.Read = memory(cols, 4)
	_, err := NewBuilder(handTruth, handReco).Add(context.Background(), sim, &Options{Workers: 2})
	var ee *EventError
	if !errors.As(err, &ee) || ee.Sample != "hand" || ee.Event != 6 {
		t.Fatalf("infinite weight: got %v, want an EventError for event 6 of hand", err)
	}
	if want := "hand: event 6: weight is +Inf"; err.Error() != want {
		t.Errorf("message %q, want %q", err, want)
	}

	// Samples with and without reco observables for the truth axes
	// cannot be mixed: purity and stability would miss events.
	b := NewBuilder(handTruth, handReco)
	if _, err := b.Add(context.Background(), handSimulation(4), nil); err != nil {
		t.Fatal(err)
	}
	other := handSimulation(4)
	other.Name, other.RecoInTruth = "other", nil
	if _, err := b.Add(context.Background(), other, nil); err == nil || !strings.Contains(err.Error(), "other: every simulated sample") {
		t.Errorf("mixed samples: got %v", err)
	}

	// A reader that hands over fewer values than the batch length.
	short := handSimulation(4)
	short.Read = func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
		return fn(0, 3, [][]float64{{0.5, 0.5, 0.5}, {0.5, 0.5}, {1, 1, 1}, {1, 1, 1}, {1, 1, 1}})
	}
	if _, err := NewBuilder(handTruth, handReco).Add(context.Background(), short, nil); err == nil || !strings.Contains(err.Error(), "column 1 with 2 values for a batch of 3") {
		t.Errorf("short column: got %v", err)
	}
}
