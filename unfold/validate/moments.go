package validate

import "math"

// Moments are running counts, means and sums of squared deviations of a
// vector of values, entry by entry: Welford's update for one value
// (B. P. Welford, Technometrics 4 (1962) 419) and the pairwise merge of
// T. F. Chan, G. H. Golub and R. J. LeVeque (Stanford CS report
// STAN-CS-79-773, 1979). Counts are per entry, so an entry may skip
// values (a pull where the uncertainty is zero).
type Moments struct {
	N    []float64 `json:"n"`
	Mean []float64 `json:"mean"`
	M2   []float64 `json:"m2"`
}

func newMoments(n int) Moments {
	return Moments{N: make([]float64, n), Mean: make([]float64, n), M2: make([]float64, n)}
}

// add adds x to entry j.
func (m *Moments) add(j int, x float64) {
	m.N[j]++
	d := x - m.Mean[j]
	m.Mean[j] += d / m.N[j]
	m.M2[j] += d * (x - m.Mean[j])
}

// merge adds the values of o to m (o unchanged). It panics if the
// lengths differ.
func (m *Moments) merge(o *Moments) {
	if len(o.N) != len(m.N) {
		panic("validate: merging moments of different lengths")
	}
	for j, nb := range o.N {
		if nb == 0 {
			continue
		}
		na := m.N[j]
		if na == 0 {
			m.N[j], m.Mean[j], m.M2[j] = nb, o.Mean[j], o.M2[j]
			continue
		}
		n := na + nb
		d := o.Mean[j] - m.Mean[j]
		m.Mean[j] += d * nb / n
		m.M2[j] += o.M2[j] + d*d*na*nb/n
		m.N[j] = n
	}
}

// variance returns the sample variance of entry j (0 with fewer than two
// values).
func (m *Moments) variance(j int) float64 {
	if m.N[j] < 2 {
		return 0
	}
	return m.M2[j] / (m.N[j] - 1)
}

func (m *Moments) clone() Moments {
	return Moments{N: append([]float64(nil), m.N...), Mean: append([]float64(nil), m.Mean...), M2: append([]float64(nil), m.M2...)}
}

// sd returns the sample standard deviation of entry j.
func (m *Moments) sd(j int) float64 { return math.Sqrt(m.variance(j)) }
