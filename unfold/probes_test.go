package unfold

import (
	"math"
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
