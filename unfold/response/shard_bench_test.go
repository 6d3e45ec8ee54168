package response_test

import (
	"context"
	"testing"

	"github.com/desmear/desmear/unfold/response"
)

// cube is a regular n×n×n binning of [0, 1)³ with one under- and one
// overflow bin on every axis.
type cube struct{ n int }

func (c cube) Len() int { m := c.n + 2; return m * m * m }
func (c cube) Locate(x []float64) int {
	g := 0
	for _, v := range x {
		i := 0
		switch {
		case v < 0:
		case v >= 1:
			i = c.n + 1
		case v == v:
			i = 1 + int(v*float64(c.n))
		default:
			return -1
		}
		g = g*(c.n+2) + i
	}
	return g
}

// splitmix64 is the mixing function of Steele, Lea and Flood (OOPSLA
// 2014): a cheap hash giving each event its values from its position, so
// that any range of events can be made on its own.
func splitmix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ x>>30) * 0xbf58476d1ce4e5b9
	x = (x ^ x>>27) * 0x94d049bb133111eb
	return x ^ x>>31
}

func unit(x uint64) float64 { return float64(x>>11) / (1 << 53) }

// synthetic streams the events [lo, hi) of a synthetic sample: three
// truth coordinates uniform on [0, 1), reco coordinates smeared by about
// 0.02 (a sum of uniforms), a weight in [0.5, 1.5), made from each
// event's position.
func synthetic(ctx context.Context, lo, hi int64, fn func(int64, int, [][]float64) error) error {
	const batch = 1 << 14
	cols := make([][]float64, 7)
	for c := range cols {
		cols[c] = make([]float64, batch)
	}
	for a := lo; a < hi; a += batch {
		if err := ctx.Err(); err != nil {
			return err
		}
		n := int(min(batch, hi-a))
		for k := 0; k < n; k++ {
			h := uint64(a+int64(k)) * 4
			for d := 0; d < 3; d++ {
				r := splitmix64(h + uint64(d))
				t := unit(r)
				cols[d][k] = t
				cols[3+d][k] = t + 0.04*(unit(r<<21)+unit(r<<42)-1)
			}
			cols[6][k] = 0.5 + unit(splitmix64(h+3))
		}
		if err := fn(a, n, cols); err != nil {
			return err
		}
	}
	return nil
}

func synthCol(i int) response.Expr {
	return response.Func(func(dst []float64, cols [][]float64) { copy(dst, cols[i][:len(dst)]) })
}

func syntheticSimulation(n int64) *response.Simulation {
	return &response.Simulation{
		Sample: response.Sample{Name: "synthetic", Events: n, Weight: synthCol(6),
			Read: func(ctx context.Context, fn func(int64, int, [][]float64) error) error {
				return synthetic(ctx, 0, n, fn)
			},
			ReadRange: synthetic},
		Truth: response.Level{Observables: []response.Expr{synthCol(0), synthCol(1), synthCol(2)}},
		Reco:  response.Level{Observables: []response.Expr{synthCol(3), synthCol(4), synthCol(5)}},
	}
}

// shardedBuild builds the shards of sim on jobs goroutines, each taking
// the next shard not yet taken and building it alone (one worker), as
// separate jobs would, and merges the partials in shard order as they
// become due.
func shardedBuild(b *testing.B, sim *response.Simulation, truth, reco response.Locator, n int64, jobs int) *response.Built {
	ranges := response.ShardRanges(n, response.DefaultShardEvents)
	type done struct {
		k int
		p *response.Built
	}
	next := make(chan int, len(ranges))
	for k := range ranges {
		next <- k
	}
	close(next)
	out := make(chan done, jobs)
	for range jobs {
		go func() {
			for k := range next {
				bd := response.NewBuilder(truth, reco)
				var part *response.Built
				bd.OnShard = func(_ int, _, _ int64, p *response.Built) error { part = p; return nil }
				if _, err := bd.AddRange(context.Background(), sim, ranges[k][0], ranges[k][1], &response.Options{Workers: 1}); err != nil {
					panic(err)
				}
				out <- done{k, part}
			}
		}()
	}
	m := response.NewMerger(truth.Len(), reco.Len())
	pending := map[int]*response.Built{}
	for want := 0; want < len(ranges); {
		d := <-out
		pending[d.k] = d.p
		for p := pending[want]; p != nil; p = pending[want] {
			if err := m.Add(p); err != nil {
				b.Fatal(err)
			}
			delete(pending, want)
			want++
		}
	}
	r, err := m.Built()
	if err != nil {
		b.Fatal(err)
	}
	return r
}

// BenchmarkShards builds the response of 2^25 synthetic events (three
// observables, a 20³ truth and a 40³ reco binning with flows) in one
// Builder with 2 workers ("single"), and as 32 shards built two at a time
// with one worker each and merged in shard order ("32x2"). Compare the
// medians of the two in the same run:
//
//	go test -run '^$' -bench Shards -count 5 ./unfold/response
func BenchmarkShards(b *testing.B) {
	const n = 1 << 25
	truth, reco := cube{20}, cube{40}
	sim := syntheticSimulation(n)
	var ref *response.Built
	check := func(r *response.Built) {
		if r.Summary.Events != n {
			b.Fatalf("%d events", r.Summary.Events)
		}
		if ref == nil {
			ref = r
		} else if r.Migrations.NNZ() != ref.Migrations.NNZ() || r.Generated[1000] != ref.Generated[1000] {
			b.Fatal("the two builds differ")
		}
	}
	b.Run("single", func(b *testing.B) {
		for range b.N {
			bd := response.NewBuilder(truth, reco)
			if _, err := bd.Add(context.Background(), sim, &response.Options{Workers: 2}); err != nil {
				b.Fatal(err)
			}
			r, err := bd.Build()
			if err != nil {
				b.Fatal(err)
			}
			check(r)
		}
		b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "events/s")
	})
	b.Run("32x2", func(b *testing.B) {
		for range b.N {
			check(shardedBuild(b, sim, truth, reco, n, 2))
		}
		b.ReportMetric(float64(n)*float64(b.N)/b.Elapsed().Seconds(), "events/s")
	})
}
