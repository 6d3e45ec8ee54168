package unfold

import (
	"math"
	"math/rand/v2"

	"gonum.org/v1/gonum/mat"
)

// Stream offsets of the random generators: probe s uses the PCG stream
// probeStream+s, toy t the stream toyStream+t, Gamma sample t of the
// data gammaStream+t, response sample s responseStream+s, all seeded
// with Settings.Seed (Streams describes them).
const (
	probeStream    uint64 = 1 << 32
	toyStream      uint64 = 2 << 32
	gammaStream    uint64 = 3 << 32
	responseStream uint64 = 4 << 32
)

// Stream describes the random numbers of one kind of unit of work
// (Result.Streams lists those a result used): unit
// k (probe, toy or sample number k, from 0) draws from the PCG
// generator of math/rand/v2 seeded with rand.NewPCG(Settings.Seed,
// Offset+k), so that a unit's numbers depend on the seed and its
// number only, not on the goroutine or batch it runs in.
type Stream struct {
	Unit   string // "probe", "poisson-toy", "gamma-sample", "response-sample" or "replica"
	Offset uint64
	// Derivation, when not empty, says how the unit's numbers are
	// derived instead of a PCG stream (the bootstrap replicas' counts,
	// method.md §25); Offset is then 0.
	Derivation string
}

// ProbeBlock is the number of probes a method propagates together, in
// one pass over the response per iteration; batches of probes are
// multiples of it.
const ProbeBlock = 8

// ProbeBatchBytes bounds the probe vectors held at once (ProbeBytes per
// probe), besides half the memory limit: probes run in batches of at
// most this many bytes (and at least one block), each batch re-running
// the nominal computation once. At 500,000 truth × 1,000,000 reco bins
// (12 MB per probe) a batch holds 40 probes.
const ProbeBatchBytes = 512 << 20

// probeBatches splits probes into the batches of at most batch probes
// each that the driver runs in turn: as few as fit, the blocks of
// ProbeBlock spread evenly over them (the first ones taking one more
// block where they do not divide), the last block, short when probes
// is no multiple of ProbeBlock, in the last batch. A batch is then no
// larger than the first (its buffers serve the next), and a short block
// shares a batch with full ones wherever the blocks come to two or more
// per batch.
// Below a block per batch the batches hold batch probes each. The probes
// do not depend on the batches they run in.
func probeBatches(probes, batch int) []int {
	if probes <= 0 {
		return nil
	}
	nb := (probes + batch - 1) / batch
	if batch < ProbeBlock {
		sizes := make([]int, nb)
		for b := range sizes {
			sizes[b] = min(batch, probes-b*batch)
		}
		return sizes
	}
	blocks := (probes + ProbeBlock - 1) / ProbeBlock
	sizes := make([]int, nb)
	left := probes
	for b := range sizes {
		n := blocks / nb
		if b < blocks%nb {
			n++
		}
		sizes[b] = min(n*ProbeBlock, left)
		left -= sizes[b]
	}
	return sizes
}

// Probes is a batch of random probes for the per-bin variances: probe s
// is the perturbation z_s of the data dn_i = ±σ(n_i) and, when the
// background variance is propagated, of the background db_i = ±σ(b_i),
// with independent random signs (Rademacher). A method propagates each
// z_s through its linearised computation (Fit.Tangents) into
// dμ_s = J z_s; E[(dμ_s)_j²] is the variance of μ_j.
type Probes struct {
	count        int
	sdN, sdB     []float64  // σ(n_i); σ(b_i), nil when not propagated
	signN, signB [][]uint64 // per probe, bit i set: +σ, clear: −σ
	dmu          [][]float64
	step         func(k int) // set by the driver recording the steps (see Step)
}

// ProbeBytes is the memory estimate of one probe of m as the methods
// hold it: a truth and a reco tangent and the sign bits.
func ProbeBytes(m *Prepared) int64 {
	b := 8*int64(m.nt) + 8*int64(m.nr) + int64(m.nr)/8 + 8
	if m.varB != nil {
		b += int64(m.nr)/8 + 8
	}
	return b
}

// NewProbes draws count probes for m, numbered from first: probe s uses
// the PCG stream probeStream+s seeded with seed, its data signs first and
// then its background signs, so a probe does not depend on the batch it
// is in.
func NewProbes(m *Prepared, first, count int, seed uint64) *Probes {
	return drawProbes(nil, m, first, count, seed)
}

// drawProbes is NewProbes reusing the vectors of pr (may be nil) for a
// batch of at most as many probes.
func drawProbes(pr *Probes, m *Prepared, first, count int, seed uint64) *Probes {
	if pr == nil || count > cap(pr.dmu) {
		pr = &Probes{}
		pr.sdN = make([]float64, m.nr)
		for i, v := range m.varN {
			pr.sdN[i] = math.Sqrt(v)
		}
		if m.varB != nil {
			pr.sdB = make([]float64, m.nr)
			for i, v := range m.varB {
				pr.sdB[i] = math.Sqrt(v)
			}
		}
		words := (m.nr + 63) / 64
		for s := 0; s < count; s++ {
			pr.signN = append(pr.signN, make([]uint64, words))
			if pr.sdB != nil {
				pr.signB = append(pr.signB, make([]uint64, words))
			}
			pr.dmu = append(pr.dmu, make([]float64, m.nt))
		}
	}
	pr.count = count
	pr.signN, pr.dmu = pr.signN[:count], pr.dmu[:count]
	if pr.signB != nil {
		pr.signB = pr.signB[:count]
	}
	for s := 0; s < count; s++ {
		rng := rand.New(rand.NewPCG(seed, probeStream+uint64(first+s)))
		for w := range pr.signN[s] {
			pr.signN[s][w] = rng.Uint64()
		}
		if pr.sdB != nil {
			for w := range pr.signB[s] {
				pr.signB[s][w] = rng.Uint64()
			}
		}
	}
	return pr
}

// Len returns the number of probes in the batch.
func (pr *Probes) Len() int { return pr.count }

// DataSD returns σ(n_i).
func (pr *Probes) DataSD() []float64 { return pr.sdN }

// BackgroundSD returns σ(b_i), nil when the background variance is not
// propagated.
func (pr *Probes) BackgroundSD() []float64 { return pr.sdB }

// Signs returns the sign bits of probe s for the data and the
// background (nil when not propagated): bit i%64 of word i/64 set means
// +σ, clear −σ.
func (pr *Probes) Signs(s int) (data, background []uint64) {
	if pr.signB != nil {
		return pr.signN[s], pr.signB[s]
	}
	return pr.signN[s], nil
}

// Sign returns the sign (±1) of bit i in bits.
func Sign(bits []uint64, i int) float64 {
	if bits[i>>6]>>(uint(i)&63)&1 != 0 {
		return 1
	}
	return -1
}

// Net returns Σ_i dn_i − Σ_i db_i of probe s, the change of the net data
// Σ (n − b), summed in bin order, data first.
func (pr *Probes) Net(s int) float64 {
	// ±σ as σ with its sign bit flipped where the probe's bit is clear:
	// the bits of Sign(bits, i)·σ, without the multiplication
	signed := func(bits []uint64, i int, sd float64) float64 {
		flip := (^bits[i>>6] >> (uint(i) & 63) & 1) << 63
		return math.Float64frombits(math.Float64bits(sd) ^ flip)
	}
	var d float64
	for i, sd := range pr.sdN {
		d += signed(pr.signN[s], i, sd)
	}
	for i, sd := range pr.sdB {
		d -= signed(pr.signB[s], i, sd)
	}
	return d
}

// RecordsSteps reports whether the driver records the tangents of every
// step (Step reads them): a method may then not leave the start's
// tangents implicit.
func (pr *Probes) RecordsSteps() bool { return pr.step != nil }

// Tangent returns dμ_s, the truth-sized vector the method fills for
// probe s.
func (pr *Probes) Tangent(s int) []float64 { return pr.dmu[s] }

// accumulateDerived adds Σ_s (D dμ_s)(D dμ_s)ᵀ of this batch to sum[i]
// for each Jacobian D = ds[i], in probe order (method.md §22).
func (pr *Probes) accumulateDerived(sum []*mat.SymDense, ds []*RowMatrix) {
	for i, D := range ds {
		y := mat.NewVecDense(D.Rows, nil)
		for s := 0; s < pr.count; s++ {
			D.Apply(y.RawVector().Data, pr.dmu[s])
			sum[i].SymRankOne(sum[i], 1, y)
		}
	}
}

// accumulate adds Σ_s dμ_s² of this batch to sum, in probe order.
func (pr *Probes) accumulate(sum []float64) {
	for s := 0; s < pr.count; s++ {
		for j, x := range pr.dmu[s] {
			sum[j] += x * x
		}
	}
}
