package response

import (
	"context"
	"fmt"
	"math"
	"runtime"
	"sort"

	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold/internal/parallel"
)

// ReplicaDerivation describes how ReplicaCount derives the count of an
// event in a replica (method.md §25), as recorded with the results.
const ReplicaDerivation = "replica r (from 0) gives event e (from 0) of simulated sample s (from 0) the count k = Poisson(1) inverse CDF of u = (h >> 11)·2^-53, h = mix(mix(mix(mix(seed) ^ s) ^ e) ^ r), mix(x) the SplitMix64 step (x + 0x9e3779b97f4a7c15, then its finaliser)"

// poisson1CDF holds the cumulative distribution of Poisson(1),
// P(K ≤ k) = e^-1 Σ_{i ≤ k} 1/i!, up to the last k below which the
// remaining tail is under 2^-53.
var poisson1CDF = func() []float64 {
	var cdf []float64
	p, sum := math.Exp(-1), 0.0
	for k := 0; ; k++ {
		if k > 0 {
			p /= float64(k)
		}
		sum += p
		cdf = append(cdf, sum)
		if p < 0x1p-60 {
			return cdf
		}
	}
}()

// mix is one step of SplitMix64 (G. L. Steele, D. Lea and C. H. Flood,
// OOPSLA 2014): the golden-ratio increment followed by its finaliser, a
// bijection of the 64-bit words.
func mix(x uint64) uint64 {
	z := x + 0x9e3779b97f4a7c15
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// ReplicaCount returns the Poisson(1) count of event event (0-based
// position in its sample) of simulated sample sample (0-based, in the
// order of the samples) in bootstrap replica replica, for seed seed
// (method.md §25, ReplicaDerivation). It is a pure function of its
// arguments: no stream is kept, so every process, shard and block of
// replicas gives an event the same count.
func ReplicaCount(seed uint64, sample int, event int64, replica int) int {
	h := mix(mix(mix(mix(seed)^uint64(sample))^uint64(event)) ^ uint64(replica))
	u := float64(h>>11) * 0x1p-53
	for k, c := range poisson1CDF {
		if u < c {
			return k
		}
	}
	return len(poisson1CDF)
}

// Replicas are bootstrap replicas [R0, R1) of a response: for replica
// R0+q, Values[q] is parallel to the values of the nominal migrations
// (the pattern FillReplicas was given), Generated[q] the generated
// counts and Fakes[q] the fakes per reco bin, every event's weight
// multiplied by its ReplicaCount.
type Replicas struct {
	R0, R1    int
	Values    [][]float64
	Generated [][]float64
	Fakes     [][]float64
	// Dropped is the number of migration entries of the nominal
	// events whose cell is not in the pattern (a cell the nominal
	// problem dropped); they are left out of every replica.
	Dropped int64
}

// ReplicaBytes returns the memory FillReplicas needs per replica for a
// pattern of nnz cells, nt truth bins and nr reco bins.
func ReplicaBytes(nnz, nt, nr int) int64 { return 8 * int64(nnz+nt+nr) }

// FillReplicas streams the events of sims (in order: sample s is
// sims[s]) once and fills the bootstrap replicas [r0, r1) of their
// response: each event located at truth and reco level adds w·k to its
// cell of pattern (k its ReplicaCount in the replica, with seed), each
// event located at truth level w·k to the generated count, each event
// located at reco level only w·k to the fakes, exactly as Builder
// classifies them. The sums of each replica are formed in event order,
// the replicas of a batch concurrently, so the bits do not depend on the
// number of workers, nor on the range [r0, r1) a replica is filled in.
// The memory is ReplicaBytes per replica.
//
// Errors: those of reading the events (an *EventError naming the sample
// and the event for a non-finite weight) and ctx.Err(). It panics if
// r1 < r0 or the pattern's dimensions are not the schemes'.
func FillReplicas(ctx context.Context, truth, reco Locator, sims []*Simulation, pattern *sparse.Matrix, seed uint64, r0, r1 int, opt *Options) (*Replicas, error) {
	nt, nr := truth.Len(), reco.Len()
	if rows, cols := pattern.Dims(); rows != nr || cols != nt || r1 < r0 {
		panic("response: FillReplicas of a pattern of other dimensions, or an empty range")
	}
	nrep := r1 - r0
	rp := &Replicas{R0: r0, R1: r1, Values: make([][]float64, nrep), Generated: make([][]float64, nrep), Fakes: make([][]float64, nrep)}
	for q := range nrep {
		rp.Values[q] = make([]float64, pattern.NNZ())
		rp.Generated[q] = make([]float64, nt)
		rp.Fakes[q] = make([]float64, nr)
	}
	colPtr, rowIdx := pattern.ColPtr(), pattern.RowIdx()
	workers := runtime.GOMAXPROCS(0)
	if opt != nil && opt.Workers > 0 {
		workers = opt.Workers
	}
	var pos []int32 // per event of a batch: the cell, or -1
	for s, sim := range sims {
		newWork := func() func(*scratch, *batch) error {
			weight := instantiate(sim.Weight)
			tl, rl := sim.Truth.instantiate(), sim.Reco.instantiate()
			return func(sc *scratch, bt *batch) error {
				if err := evalWeights(&sim.Sample, weight, bt); err != nil {
					return err
				}
				sc.locate(bt.truth, tl, truth, bt.cols, bt.n)
				sc.locate(bt.reco, rl, reco, bt.cols, bt.n)
				return nil
			}
		}
		consume := func(bt *batch) error {
			pos = pos[:0]
			for k, t := range bt.truth {
				p := int32(-1)
				if r := bt.reco[k]; t >= 0 && r >= 0 {
					lo, hi := colPtr[t], colPtr[t+1]
					i := lo + sort.SearchInts(rowIdx[lo:hi], int(r))
					if i < hi && rowIdx[i] == int(r) {
						p = int32(i)
					} else {
						rp.Dropped++
					}
				}
				pos = append(pos, p)
			}
			parallel.For(nrep, workers, func(q int) {
				val, gen, fake := rp.Values[q], rp.Generated[q], rp.Fakes[q]
				for k := range bt.n {
					t, r := bt.truth[k], bt.reco[k]
					if t < 0 && r < 0 {
						continue
					}
					c := ReplicaCount(seed, s, bt.start+int64(k), r0+q)
					if c == 0 {
						continue
					}
					w := bt.w[k] * float64(c)
					switch {
					case t >= 0:
						gen[t] += w
						if p := pos[k]; p >= 0 {
							val[p] += w
						}
					case r >= 0:
						fake[r] += w
					}
				}
			})
			return nil
		}
		if _, _, err := stream(ctx, &sim.Sample, sim.Read, 0, opt, newWork, consume); err != nil {
			return nil, fmt.Errorf("bootstrap replicas %d to %d: %w", r0, r1-1, err)
		}
	}
	return rp, nil
}
