package bench

import (
	"context"
	"crypto/sha256"
	"encoding/binary"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"time"

	"github.com/desmear/desmear/unfold"
)

// BenchmarkFineFill: the whole job's fill alone (filledProblem at the
// fine grid: 50 M events generated in memory, 45 M entries, the generated
// weights and the matrix), one fill per iteration; reports the medians of
// the wall and CPU seconds per fill and the process's peak resident
// memory, and logs the SHA-256 of the filled problem (problemDigest),
// which must not move when the fill is only made faster. Run it in a process of its own (-count 1, -benchtime Nx) so that
// the peak is the fill's.
func BenchmarkFineFill(b *testing.B) {
	c, err := ConfigOf(Fine)
	if err != nil {
		b.Fatal(err)
	}
	var wall, cpu []float64
	var nnz int
	var digest [32]byte
	for range b.N {
		t0, c0 := time.Now(), cpuTime()
		p, err := filledProblem(context.Background(), c)
		if err != nil {
			b.Fatal(err)
		}
		wall, cpu = append(wall, time.Since(t0).Seconds()), append(cpu, (cpuTime()-c0).Seconds())
		nnz = p.Migrations.NNZ()
		digest = problemDigest(p)
	}
	b.Logf("SHA-256 of the filled problem: %x", digest)
	med := func(x []float64) float64 { slices.Sort(x); return x[len(x)/2] }
	b.ReportMetric(med(wall), "s/fill")
	b.ReportMetric(med(cpu), "CPU-s/fill")
	b.ReportMetric(float64(peakRSS())/1e6, "MB-peak-RSS")
	b.ReportMetric(float64(nnz), "non-zeros")
}

// problemDigest is the SHA-256 of the filled problem's matrix arrays
// (column pointers, row indices, values, squared-weight sums), generated
// weights and data, in little-endian order.
func problemDigest(p *unfold.Problem) [32]byte {
	h := sha256.New()
	var buf [8]byte
	put := func(u uint64) { binary.LittleEndian.PutUint64(buf[:], u); h.Write(buf[:]) }
	m := p.Migrations
	for _, v := range m.ColPtr() {
		put(uint64(v))
	}
	for _, v := range m.RowIdx() {
		put(uint64(v))
	}
	for _, v := range m.Values() {
		put(math.Float64bits(v))
	}
	for _, v := range p.Migrations.SumW2() {
		put(math.Float64bits(v))
	}
	for _, v := range p.Generated {
		put(math.Float64bits(v))
	}
	for _, v := range p.Data {
		put(math.Float64bits(v))
	}
	var s [32]byte
	copy(s[:], h.Sum(nil))
	return s
}

// The batch generator of the fill draws the events of event, the plain
// one-event-at-a-time definition of the benchmark's simulation, bit for
// bit: the same truth bin, reco bin (or none) and weight for every event
// of a stream, at every size.
func TestEventGenMatchesEvent(t *testing.T) {
	for _, s := range Sizes {
		c, err := ConfigOf(s)
		if err != nil {
			t.Fatal(err)
		}
		g := newEventGen(c)
		const n = 50000
		cnt := newGenCounter(c.Truth[0]*c.Truth[1]*c.Truth[2], n)
		rows, cols, wts := g.batch(rand.New(rand.NewPCG(0x5eed, 7)), n, nil, nil, nil, cnt)
		ref := rand.New(rand.NewPCG(0x5eed, 7))
		k := 0
		for e := range n {
			tr, rc, w := event(ref, c)
			if got := cnt.tq[e]; got != uint64(tr)<<8|uint64(math.Round((w-0.8)*255/0.4)) || wts == nil {
				t.Fatalf("%s: event %d recorded as %#x, want truth %d, weight %v", s, e, got, tr, w)
			}
			if rc < 0 {
				continue
			}
			if k >= len(rows) || int(rows[k]) != rc || int(cols[k]) != tr || math.Float64bits(wts[k]) != math.Float64bits(w) {
				t.Fatalf("%s: event %d: entry %d differs from (reco %d, truth %d, weight %v)", s, e, k, rc, tr, w)
			}
			k++
		}
		if k != len(rows) {
			t.Fatalf("%s: %d entries, want %d", s, len(rows), k)
		}
	}
}
