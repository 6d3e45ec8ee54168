package response

import (
	"context"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/inversion"
)

// The counts are Poisson(1): mean 1, variance 1, P(0) = e^-1 (common
// practice: the Poisson bootstrap, method.md §25 Bootstrap replicas of
// the simulated events), and independent between replicas.
func TestReplicaCountPoisson(t *testing.T) {
	const events, replicas = 20000, 10
	n := float64(events * replicas)
	var sum, sum2, zeros, cross, c0, c1 float64
	for e := range int64(events) {
		for r := range replicas {
			k := float64(ReplicaCount(7, 1, e, r))
			sum += k
			sum2 += k * k
			if k == 0 {
				zeros++
			}
		}
		a, b := float64(ReplicaCount(7, 1, e, 0)), float64(ReplicaCount(7, 1, e, 1))
		cross += (a - 1) * (b - 1)
		c0, c1 = c0+a, c1+b
	}
	mean := sum / n
	variance := sum2/n - mean*mean
	// Standard errors: 1/√n for the mean, √(3/n) for the variance
	// (μ4 − σ⁴ = 3 for Poisson(1)), √(p(1−p)/n) for P(0) (common practice).
	if math.Abs(mean-1) > 5/math.Sqrt(n) {
		t.Errorf("mean %v, want 1", mean)
	}
	if math.Abs(variance-1) > 5*math.Sqrt(3/n) {
		t.Errorf("variance %v, want 1", variance)
	}
	p0 := math.Exp(-1)
	if got := zeros / n; math.Abs(got-p0) > 5*math.Sqrt(p0*(1-p0)/n) {
		t.Errorf("P(0) = %v, want e^-1 = %v", got, p0)
	}
	if cov := cross / events; math.Abs(cov) > 5/math.Sqrt(events) {
		t.Errorf("covariance of the counts of one event in replicas 0 and 1 is %v, want 0", cov)
	}
	// Another seed, sample or replica gives other counts.
	same := 0
	for e := range int64(1000) {
		if ReplicaCount(7, 1, e, 0) == ReplicaCount(8, 1, e, 0) && ReplicaCount(7, 1, e, 0) == ReplicaCount(7, 2, e, 0) {
			same++
		}
	}
	if same > 500 {
		t.Errorf("%d of 1000 events have the same count for another seed and sample", same)
	}
}

// replicaReference fills replica r of the events cols (the columns of
// randomSimulation) with a plain loop in event order: the definition
// FillReplicas must reproduce bit for bit (method.md §25).
func replicaReference(cols [][]float64, truth, reco Locator, seed uint64, r int) (cells map[[2]int]float64, gen, fake []float64) {
	cells = map[[2]int]float64{}
	gen, fake = make([]float64, truth.Len()), make([]float64, reco.Len())
	for e := range cols[0] {
		ti, ri := -1, -1
		if cols[5][e] != 0 {
			ti = truth.Locate([]float64{cols[0][e], cols[1][e]})
		}
		if cols[6][e] != 0 {
			ri = reco.Locate([]float64{cols[2][e], cols[3][e]})
		}
		w := cols[4][e] * float64(ReplicaCount(seed, 0, int64(e), r))
		switch {
		case ti >= 0 && ri >= 0:
			cells[[2]int{ri, ti}] += w
			gen[ti] += w
		case ti >= 0:
			gen[ti] += w
		case ri >= 0:
			fake[ri] += w
		}
	}
	return cells, gen, fake
}

func TestFillReplicasSameBits(t *testing.T) {
	cols := randomEvents(3000, 11)
	truth, reco := grid2D{nx: 4, ny: 3}, grid2D{nx: 5, ny: 4}
	b := NewBuilder(truth, reco)
	if _, err := b.Add(context.Background(), randomSimulation(cols, 64), nil); err != nil {
		t.Fatal(err)
	}
	nom, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	fill := func(batch, workers, r0, r1 int) *Replicas {
		rp, err := FillReplicas(ctx, truth, reco, []*Simulation{randomSimulation(cols, batch)}, nom.Migrations, 3, r0, r1, &Options{Workers: workers})
		if err != nil {
			t.Fatal(err)
		}
		return rp
	}
	ref := fill(64, 1, 0, 5)
	a, c := fill(7, 4, 0, 2), fill(500, 3, 2, 5)
	for q := range 5 {
		o, oq := a, q
		if q >= 2 {
			o, oq = c, q-2
		}
		if !slices.Equal(ref.Values[q], o.Values[oq]) || !slices.Equal(ref.Generated[q], o.Generated[oq]) || !slices.Equal(ref.Fakes[q], o.Fakes[oq]) {
			t.Errorf("replica %d: other bits with another batch size, worker count or range", q)
		}
	}
	// Against the plain loop, cell by cell.
	colPtr, rowIdx := nom.Migrations.ColPtr(), nom.Migrations.RowIdx()
	for q := range 5 {
		cells, gen, fake := replicaReference(cols, truth, reco, 3, q)
		if !slices.Equal(gen, ref.Generated[q]) || !slices.Equal(fake, ref.Fakes[q]) {
			t.Errorf("replica %d: generated or fakes differ from the plain loop", q)
		}
		for j := range truth.Len() {
			for p := colPtr[j]; p < colPtr[j+1]; p++ {
				if got, want := ref.Values[q][p], cells[[2]int{rowIdx[p], j}]; got != want {
					t.Errorf("replica %d cell (%d,%d): %v, want %v", q, rowIdx[p], j, got, want)
				}
			}
		}
	}
	if ref.Dropped != 0 {
		t.Errorf("%d entries dropped on the nominal pattern", ref.Dropped)
	}
}

// The bootstrap covariance of an unfolded spectrum agrees with the
// Dirichlet sampling of the response (method.md §20 Sampling the
// response) and with the linear propagation of the multinomial
// covariance of each response column, Cov(R_kj, R_lj) = R_kj(δ_kl −
// R_lj)/N_j (common practice), through the Jacobian of the estimate in
// the response (central finite differences), within the toy precision
// √(2/(N−1)) of a variance from N samples (method.md §25). The bits of
// the bootstrap do not depend on the core count or the block size.
func TestReplicaCovarianceAgrees(t *testing.T) {
	const nb, events, replicas = 24, 60000, 600
	rng := rand.New(rand.NewPCG(21, 2))
	cols := [][]float64{make([]float64, events), make([]float64, events), make([]float64, events)}
	for e := range events {
		x := math.Mod(0.3+0.25*rng.NormFloat64()+2, 1) // truth: a wrapped Gaussian in [0, 1)
		cols[0][e] = x
		cols[1][e] = x + 0.02*rng.NormFloat64() // reco: half a bin of resolution
		cols[2][e] = float64(boolInt(rng.Float64() < 0.85))
	}
	edges := make([]float64, nb+1)
	for i := range edges {
		edges[i] = float64(i) / nb
	}
	scheme := edges1D{edges: edges}
	sim := func() *Simulation {
		return &Simulation{Sample: Sample{Name: "smeared", Read: memory(cols, 1000), Events: events},
			Truth: Level{Observables: []Expr{col(0)}}, Reco: Level{Observables: []Expr{col(1)}, Select: col(2)}}
	}
	ctx := context.Background()
	b := NewBuilder(scheme, scheme)
	if _, err := b.Add(ctx, sim(), nil); err != nil {
		t.Fatal(err)
	}
	nom, err := b.Build()
	if err != nil {
		t.Fatal(err)
	}
	data := make([]float64, nb)
	nom.Migrations.RowSums(data)
	for i := range data {
		data[i] *= 0.5
	}
	p := &unfold.Problem{Migrations: nom.Migrations, Generated: nom.Generated, GeneratedSumW2: nom.GeneratedSumW2, Data: data}
	m := &inversion.Settings{}
	full := &unfold.Settings{Covariance: unfold.Full, ResponseSamples: replicas, Seed: 5}

	// The bootstrap, in one block and in two, on 1 and 2 cores.
	boot := func(blocks [][2]int) *unfold.Ensemble {
		ens := unfold.NewEnsemble(nb, true)
		for _, bl := range blocks {
			rp, err := FillReplicas(ctx, scheme, scheme, []*Simulation{sim()}, p.Migrations, 5, bl[0], bl[1], nil)
			if err != nil {
				t.Fatal(err)
			}
			err = unfold.UnfoldEach(ctx, ens, nil, m, bl[0], bl[1], func(r int) (*unfold.Problem, error) {
				q := *p
				a, err := p.Migrations.WithValues(rp.Values[r-bl[0]], nil)
				q.Migrations, q.Generated = a, rp.Generated[r-bl[0]]
				return &q, err
			})
			if err != nil {
				t.Fatal(err)
			}
		}
		return ens
	}
	prev := runtime.GOMAXPROCS(1)
	one := boot([][2]int{{0, replicas}})
	runtime.GOMAXPROCS(2)
	two := boot([][2]int{{0, 100}, {100, replicas}})
	runtime.GOMAXPROCS(prev)
	if !slices.Equal(one.M2, two.M2) || !slices.Equal(one.Mean, two.Mean) {
		t.Errorf("the bootstrap ensemble has other bits on 2 cores in two blocks than on 1 core in one")
	}
	det := make([]bool, nb)
	for j := range det {
		det[j] = true
	}
	vBoot := unfold.EnsembleSource(unfold.SourceSimulation, unfold.MethodReplicas, one, det).Covariance

	res, err := unfold.Unfold(ctx, p, full, m)
	if err != nil {
		t.Fatal(err)
	}
	vDir := res.Source(unfold.SourceSimulation).Covariance

	// Linear propagation: J_c = ∂x/∂R_c by central differences, R_c =
	// A_c/G_j moved by ±h with G_j fixed.
	colPtr, val := nom.Migrations.ColPtr(), nom.Migrations.Values()
	estimate := func(v []float64) []float64 {
		a, err := nom.Migrations.WithValues(v, nil)
		if err != nil {
			t.Fatal(err)
		}
		q := *p
		q.Migrations = a
		pr, err := unfold.Prepare(&q, 0)
		if err != nil {
			t.Fatal(err)
		}
		fit, err := m.Fit(ctx, pr)
		if err != nil {
			t.Fatal(err)
		}
		return slices.Clone(fit.Estimate())
	}
	const h = 1e-4
	jac := make([][]float64, len(val))
	for j := range nb {
		for c := colPtr[j]; c < colPtr[j+1]; c++ {
			v := slices.Clone(val)
			v[c] = val[c] + h*nom.Generated[j]
			up := estimate(v)
			v[c] = val[c] - h*nom.Generated[j]
			down := estimate(v)
			jac[c] = make([]float64, nb)
			for i := range nb {
				jac[c][i] = (up[i] - down[i]) / (2 * h)
			}
		}
	}
	vLin := make([][]float64, nb)
	for i := range vLin {
		vLin[i] = make([]float64, nb)
	}
	for j := range nb {
		nj := nom.Generated[j] // unit weights: N_j = G_j
		for c := colPtr[j]; c < colPtr[j+1]; c++ {
			rc := val[c] / nom.Generated[j]
			for d := colPtr[j]; d < colPtr[j+1]; d++ {
				rd := val[d] / nom.Generated[j]
				cov := -rc * rd / nj
				if c == d {
					cov += rc / nj
				}
				for a := range nb {
					for e := range nb {
						vLin[a][e] += jac[c][a] * cov * jac[d][e]
					}
				}
			}
		}
	}
	prec := math.Sqrt(2.0 / (replicas - 1)) // method.md §25: relative precision of a variance from N samples
	for i := range nb {
		lin, bo, di := vLin[i][i], vBoot.At(i, i), vDir.At(i, i)
		if math.Abs(bo/lin-1) > 4*prec {
			t.Errorf("bin %d: bootstrap variance %.4g, linear propagation %.4g (ratio %.3f, tolerance 4·%.3f)", i, bo, lin, bo/lin, prec)
		}
		if math.Abs(di/lin-1) > 4*prec {
			t.Errorf("bin %d: Dirichlet variance %.4g, linear propagation %.4g (ratio %.3f)", i, di, lin, di/lin)
		}
		if math.Abs(bo/di-1) > 4*math.Sqrt2*prec {
			t.Errorf("bin %d: bootstrap variance %.4g, Dirichlet %.4g (ratio %.3f)", i, bo, di, bo/di)
		}
		if i+1 < nb {
			// The standard error of a correlation from N samples is at
			// most 1/√N (common practice).
			rl := vLin[i][i+1] / math.Sqrt(lin*vLin[i+1][i+1])
			rb := vBoot.At(i, i+1) / math.Sqrt(bo*vBoot.At(i+1, i+1))
			if math.Abs(rb-rl) > 4/math.Sqrt(replicas) {
				t.Errorf("bins %d,%d: bootstrap correlation %.3f, linear propagation %.3f", i, i+1, rb, rl)
			}
		}
	}
}
