package unfold

import (
	"math"
	"slices"
	"testing"
)

// Net is Σ_i dn_i − Σ_i db_i with dn_i = ±σ(n_i), db_i = ±σ(b_i), the
// signs of the probe's bits (Rademacher probes, method.md §9 Probes and toys), summed in
// bin order, data first: checked bit for bit against that sum written
// out here with the documented sign rule, over 150 bins (three words of
// sign bits, the last one partial), with Poisson data variances and a
// given background variance.
func TestProbesNet(t *testing.T) {
	const k = 150
	eff, n := make([]float64, k), make([]float64, k)
	for i := range eff {
		eff[i] = 0.3 + 0.6*float64(i%7)/7
		n[i] = float64(3 + (i*37)%101)
	}
	n[5] = 0 // σ = 0: ±0
	p := diagonalProblem(t, eff, n)
	p.Background, p.BackgroundVariance = make([]float64, k), make([]float64, k)
	for i := range p.Background {
		p.Background[i] = 0.5
		p.BackgroundVariance[i] = 0.1 + float64(i%5)
	}
	m, err := Prepare(p, InModel)
	if err != nil {
		t.Fatal(err)
	}
	pr := NewProbes(m, 3, 5, 11)
	for s := 0; s < pr.Len(); s++ {
		sn, sb := pr.Signs(s)
		var want float64
		for i := range n {
			sign := -1.0
			if sn[i/64]&(1<<(i%64)) != 0 {
				sign = 1
			}
			want += sign * math.Sqrt(n[i]) // Poisson: var n_i = n_i
		}
		for i, v := range p.BackgroundVariance {
			sign := -1.0
			if sb[i/64]&(1<<(i%64)) != 0 {
				sign = 1
			}
			want -= sign * math.Sqrt(v)
		}
		if got := pr.Net(s); math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("probe %d: Net %v, want %v", s, got, want)
		}
	}
}

// probeBatches: as few batches as fit, ⌈probes/batch⌉ (the closed form
// of the smallest count of batches of at most batch), none larger than
// the first, every batch but the last a whole number of blocks, the short
// block in the last batch beside full ones (where the blocks come to two
// or more per batch), and the batches covering
// every probe once; the sizes written out for the fine grid's plan (100
// probes, 32 per batch) and for batches below a block.
func TestProbeBatches(t *testing.T) {
	if got, want := probeBatches(100, 32), []int{32, 24, 24, 20}; !slices.Equal(got, want) {
		t.Errorf("100 probes, 32 per batch: %v, want %v", got, want)
	}
	if got, want := probeBatches(10, 4), []int{4, 4, 2}; !slices.Equal(got, want) {
		t.Errorf("10 probes, 4 per batch: %v, want %v", got, want)
	}
	for probes := 1; probes <= 130; probes++ {
		for batch := 1; batch <= 70; batch++ {
			if batch >= ProbeBlock && batch%ProbeBlock != 0 {
				continue // probeBatch gives whole blocks above one
			}
			sizes := probeBatches(probes, batch)
			if len(sizes) != (probes+batch-1)/batch {
				t.Fatalf("%d probes, %d per batch: %d batches %v", probes, batch, len(sizes), sizes)
			}
			sum := 0
			for b, n := range sizes {
				sum += n
				if n < 1 || n > batch || n > sizes[0] {
					t.Fatalf("%d probes, %d per batch: batch %d of %d probes %v", probes, batch, b, n, sizes)
				}
				if batch >= ProbeBlock && b+1 < len(sizes) && n%ProbeBlock != 0 {
					t.Fatalf("%d probes, %d per batch: batch %d not whole blocks %v", probes, batch, b, sizes)
				}
				if blocks := (probes + ProbeBlock - 1) / ProbeBlock; batch >= ProbeBlock && blocks/len(sizes) >= 2 && n < ProbeBlock {
					t.Fatalf("%d probes, %d per batch: batch %d of a short block alone %v", probes, batch, b, sizes)
				}
			}
			if sum != probes {
				t.Fatalf("%d probes, %d per batch: batches %v cover %d", probes, batch, sizes, sum)
			}
		}
	}
}
