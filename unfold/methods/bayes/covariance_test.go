package bayes

import (
	"context"
	"errors"
	"github.com/desmear/desmear/unfold"
	"gonum.org/v1/gonum/stat/distuv"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// finiteJacobian returns dμ(K)/dv by central differences of the whole
// iteration (Unfold called on perturbed inputs), where v is the slice of
// the problem that perturb selects.
func finiteJacobian(t *testing.T, p *unfold.Problem, s *opts, v []float64) [][]float64 {
	t.Helper()
	nt := len(p.Generated)
	out := make([][]float64, nt)
	for j := range out {
		out[j] = make([]float64, len(v))
	}
	for q := range v {
		x := v[q]
		h := 1e-4 * math.Max(1, x)
		v[q] = x + h
		up := unfoldOrFail(t, p, s)
		v[q] = x - h
		dn := unfoldOrFail(t, p, s)
		v[q] = x
		for j := 0; j < nt; j++ {
			out[j][q] = (up.Estimate[j] - dn.Estimate[j]) / (2 * h)
		}
	}
	return out
}

// The analytic (linearised) propagation agrees with central finite
// differences of the whole iteration to 1e-6 (method.md §8: the
// recursion is derived there and in the package documentation; finite
// differences are the independent check). Cases: data and background
// Jacobians with the background in the model, the subtracted background,
// and smoothing between iterations. The full covariance is then checked
// against J diag(var) Jᵀ built from the finite-difference Jacobians.
func TestJacobianAgainstFiniteDifferences(t *testing.T) {
	sch := chainScheme(t, 9)
	cases := []struct {
		name string
		bkg  bool
		s    opts
	}{
		{"plain", false, opts{Iterations: 5}},
		{"background in model", true, opts{Iterations: 5}},
		{"background subtracted", true, opts{Iterations: 4, Background: unfold.Subtract}},
		{"smoothing", false, opts{Iterations: 4, Smoothing: &Smoothing{Neighbours: sch, Strength: 0.5}}},
		{"smoothing with background", true, opts{Iterations: 3, Smoothing: &Smoothing{Neighbours: sch}}},
		{"2-D smoothing, strength below 1", true, opts{Iterations: 4, Smoothing: &Smoothing{Neighbours: gridScheme(t, 3, 3), Strength: 0.4}}},
	}
	for _, c := range cases {
		p := randomProblem(t, 21, 9, 17, 5, c.bkg)
		if c.bkg {
			p.BackgroundVariance = make([]float64, len(p.Background))
			for i, b := range p.Background {
				p.BackgroundVariance[i] = 0.3 * b
			}
			p.DataVariance = make([]float64, len(p.Data))
			for i, x := range p.Data {
				p.DataVariance[i] = 1.2 * x
			}
		}
		s := c.s
		jc, _ := jacobianOf(t, p, &s)
		fdN := finiteJacobian(t, p, &s, p.Data)
		var fdB [][]float64
		if c.bkg {
			fdB = finiteJacobian(t, p, &s, p.Background)
		}
		nr := len(p.Data)
		for j := range fdN {
			for q := 0; q < nr; q++ {
				got := jc.at(j, q)
				if c.bkg && s.Background == unfold.Subtract {
					// columns are d/dn' with n' = n − b: dμ/dn = J, dμ/db = −J
					if math.Abs(got+fdB[j][q]) > 1e-6 {
						t.Errorf("%s: dμ_%d/db_%d analytic %.9f, finite %.9f", c.name, j, q, -got, fdB[j][q])
					}
				}
				if math.Abs(got-fdN[j][q]) > 1e-6 {
					t.Errorf("%s: dμ_%d/dn_%d analytic %.9f, finite %.9f", c.name, j, q, got, fdN[j][q])
				}
				if c.bkg && s.Background == unfold.InModel {
					if gb := jc.at(j, nr+q); math.Abs(gb-fdB[j][q]) > 1e-6 {
						t.Errorf("%s: dμ_%d/db_%d analytic %.9f, finite %.9f", c.name, j, q, gb, fdB[j][q])
					}
				}
			}
		}

		// Full covariance vs the finite-difference propagation.
		s.Covariance = unfold.Full
		res := unfoldOrFail(t, p, &s)
		varN := p.Data
		if p.DataVariance != nil {
			varN = p.DataVariance
		}
		for a := range fdN {
			for b := range fdN {
				var v float64
				for q := 0; q < nr; q++ {
					v += fdN[a][q] * fdN[b][q] * varN[q]
					if c.bkg {
						v += fdB[a][q] * fdB[b][q] * p.BackgroundVariance[q]
					}
				}
				if got := res.Covariance.At(a, b); math.Abs(got-v) > 1e-6*math.Max(1, math.Abs(v)) {
					t.Errorf("%s: V[%d][%d] = %.9g, from finite differences %.9g", c.name, a, b, got, v)
				}
			}
		}
	}
}

// The linearised covariance agrees with the covariance of 2,000 Poisson
// toys (pseudo-data n_i ~ Poisson(n_i), unfolded with the same number of
// iterations) within the toys' statistical precision: the standard error
// of a sample covariance is sqrt((V_aa V_bb + V_ab²)/(T−1)) for Gaussian
// estimates (common practice). Counts are large, so the linearisation
// error is far below that precision.
func TestCovarianceAgainstPoissonToys(t *testing.T) {
	p := randomProblem(t, 8, 6, 11, 4, false)
	for i := range p.Data {
		p.Data[i] *= 20 // large counts
	}
	const T = 2000
	for _, k := range []int{2, 6} {
		res := unfoldOrFail(t, p, &opts{Iterations: k, Covariance: unfold.Full})
		m, _ := prepare(p, unfold.InModel)
		rs, _ := (&opts{Iterations: k}).resolve()
		it := newIterator(m, nil)
		n := make([]float64, len(p.Data))
		mean := make([]float64, 6)
		sum := make([][]float64, 6)
		var est [][]float64
		for toy := 0; toy < T; toy++ {
			src := rand.NewPCG(42, uint64(toy))
			for i, x := range m.n {
				n[i] = distuv.Poisson{Lambda: x, Src: src}.Rand()
			}
			if _, err := it.run(context.Background(), n, rs, nil); err != nil {
				t.Fatal(err)
			}
			e := append([]float64(nil), it.mu...)
			est = append(est, e)
			for j, x := range e {
				mean[j] += x / T
			}
		}
		for a := range sum {
			sum[a] = make([]float64, 6)
			for b := range sum[a] {
				for _, e := range est {
					sum[a][b] += (e[a] - mean[a]) * (e[b] - mean[b])
				}
				sum[a][b] /= T - 1
			}
		}
		for a := 0; a < 6; a++ {
			for b := 0; b <= a; b++ {
				v := res.Covariance.At(a, b)
				se := math.Sqrt((res.Covariance.At(a, a)*res.Covariance.At(b, b) + v*v) / (T - 1))
				if d := math.Abs(sum[a][b] - v); d > 4*se {
					t.Errorf("K=%d V[%d][%d]: linearised %.4g, toys %.4g, difference %.2g standard errors", k, a, b, v, sum[a][b], d/se)
				}
			}
		}
		// The library's own toy method agrees with the same precision.
		toys := unfoldOrFail(t, p, &opts{Iterations: k, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: T, Seed: 42})
		if toys.UncertaintyMethod != "poisson-toys" || toys.Samples != T {
			t.Errorf("toy method reported %q with %d samples", toys.UncertaintyMethod, toys.Samples)
		}
		for j := 0; j < 6; j++ {
			v := res.Covariance.At(j, j)
			got := toys.Uncertainty[j] * toys.Uncertainty[j]
			if math.Abs(got-v) > 4*toys.UncertaintyPrecision*v {
				t.Errorf("K=%d bin %d: toy variance %.4g, linearised %.4g (precision %.3f)", k, j, got, v, toys.UncertaintyPrecision)
			}
		}
	}
}

// The probe estimate of the per-bin variances agrees with the exact
// diagonal of the linearised covariance within its stated precision: for
// Rademacher probes the relative standard deviation of each variance is
// at most sqrt(2/S) (Hutchinson, Commun. Stat. Simul. Comput. 18 (1989)
// 1059, from memory, for the trace estimator; the same bound holds per
// diagonal element). With 400 probes the mean relative error over the
// bins must also be near zero.
func TestProbesAgainstExactDiagonal(t *testing.T) {
	p := randomProblem(t, 4, 60, 130, 9, true)
	p.BackgroundVariance = make([]float64, len(p.Background))
	for i, b := range p.Background {
		p.BackgroundVariance[i] = b
	}
	const S = 400
	exact := unfoldOrFail(t, p, &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact})
	full := unfoldOrFail(t, p, &opts{Iterations: 4, Covariance: unfold.Full})
	probe := unfoldOrFail(t, p, &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: S, Seed: 7})
	if probe.UncertaintyMethod != "linearised-probes" || !near(probe.UncertaintyPrecision, math.Sqrt(2.0/S), 1e-15) {
		t.Errorf("probe method %q precision %g", probe.UncertaintyMethod, probe.UncertaintyPrecision)
	}
	var bias float64
	for j := range exact.Uncertainty {
		ve := exact.Uncertainty[j] * exact.Uncertainty[j]
		if vf := full.Covariance.At(j, j); !near(ve, vf, 1e-12) {
			t.Errorf("bin %d: exact diagonal %g, full covariance %g", j, ve, vf)
		}
		vp := probe.Uncertainty[j] * probe.Uncertainty[j]
		rel := (vp - ve) / ve
		bias += rel / float64(len(exact.Uncertainty))
		if math.Abs(rel) > 4*probe.UncertaintyPrecision {
			t.Errorf("bin %d: probe variance %.4g, exact %.4g (%.2f, precision %.3f)", j, vp, ve, rel, probe.UncertaintyPrecision)
		}
	}
	if math.Abs(bias) > probe.UncertaintyPrecision {
		t.Errorf("mean relative error of the probe variances %.3f", bias)
	}

	// Probes computed in several batches (a small memory limit) give the
	// same bits as one batch.
	small := unfold.ProbeBytes(mustModel(t, p).p) * 2 * 37 // 37 probes per batch
	batched := unfoldOrFail(t, p, &opts{Iterations: 4, Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: S, Seed: 7, MemoryLimit: small})
	for j := range batched.Uncertainty {
		if batched.Uncertainty[j] != probe.Uncertainty[j] {
			t.Fatalf("bin %d: batched probes %v, one batch %v", j, batched.Uncertainty[j], probe.Uncertainty[j])
		}
	}
}

func mustModel(t *testing.T, p *unfold.Problem) *model {
	m, err := prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// A full covariance above the memory limit is refused with a
// *TooLargeError giving the estimate and the alternative; the automatic
// diagonal then falls back to probes.
func TestMemoryLimit(t *testing.T) {
	p := randomProblem(t, 4, 60, 130, 9, false)
	_, err := unfoldWith(context.Background(), p, &opts{Covariance: unfold.Full, MemoryLimit: 1 << 16})
	var tl *unfold.TooLargeError
	if !errors.As(err, &tl) {
		t.Fatalf("got %v, want a *TooLargeError", err)
	}
	// method.md §8 Linearised uncertainty propagation (Costs): the
	// Jacobian's two buffers and the covariance (the work matrix of its
	// size fits in the second buffer: more columns than truth bins).
	if want := int64(16*60*130 + 8*60*60); tl.Bytes != want || tl.Limit != 1<<16 {
		t.Errorf("estimate %d limit %d, want %d and %d", tl.Bytes, tl.Limit, want, 1<<16)
	}
	// Fewer columns than truth bins: the work matrix needs 8·n_t·(n_t − n_r)
	// bytes more (method.md §8, Costs).
	q := randomProblem(t, 4, 60, 40, 9, false)
	_, err = unfoldWith(context.Background(), q, &opts{Covariance: unfold.Full, MemoryLimit: 1 << 10})
	if want := int64(16*60*40 + 8*60*60 + 8*60*20); !errors.As(err, &tl) || tl.Bytes != want {
		t.Errorf("60 truth × 40 reco bins: got %v, want a *unfold.TooLargeError of %d bytes", err, want)
	}
	// The exact per-bin variances need the dense Jacobian alone
	// (16·n_t·n_r bytes), refused under the same limit.
	_, err = unfoldWith(context.Background(), p, &opts{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact, MemoryLimit: 1 << 16})
	if !errors.As(err, &tl) || tl.Bytes != 16*60*130 {
		t.Errorf("exact diagonal under a small limit: got %v, want a *unfold.TooLargeError of %d bytes", err, 16*60*130)
	}
	res := unfoldOrFail(t, p, &opts{Covariance: unfold.Diagonal, MemoryLimit: 1 << 16})
	if res.UncertaintyMethod != "linearised-probes" {
		t.Errorf("automatic diagonal under a small limit used %q", res.UncertaintyMethod)
	}
	res = unfoldOrFail(t, p, &opts{Covariance: unfold.Diagonal})
	if res.UncertaintyMethod != "linearised" || res.UncertaintyPrecision != 0 {
		t.Errorf("automatic diagonal under the default limit used %q", res.UncertaintyMethod)
	}
	// A limit below what one probe needs (probes run in batches within half
	// the limit) is refused too, rather than silently exceeded.
	_, err = unfoldWith(context.Background(), p, &opts{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, MemoryLimit: 10})
	if !errors.As(err, &tl) {
		t.Fatalf("probes under a 10-byte limit: got %v, want a *TooLargeError", err)
	}
}

// The covariance carried along the recursion (method.md §8 Linearised
// uncertainty propagation) equals the plain gonum product J D Jᵀ of the
// Jacobian computed alone (gonum as the reference library), with D the
// column variances: data variances, and background variances in the
// columns of the background when it is in the model; for sizes spanning
// several column blocks of the recursion, with more and with fewer
// columns than truth bins (the work matrix in the Jacobian's second
// buffer, or of its own), bit for bit the same on 1 and 2 cores.
func TestCarriedCovariance(t *testing.T) {
	for _, c := range []struct {
		nt, nr int
		bkg    bool
	}{{700, 1500, false}, {700, 1500, true}, {700, 300, false}, {700, 300, true}} {
		nt, bkg := c.nt, c.bkg
		p := randomProblem(t, 6, nt, c.nr, 9, bkg)
		nr := len(p.Data)
		v := slices.Clone(p.Data)
		if bkg {
			p.BackgroundVariance = make([]float64, nr)
			for i, b := range p.Background {
				p.BackgroundVariance[i] = 0.3 * b
			}
			v = append(v, p.BackgroundVariance...)
		}
		s := &opts{Iterations: 3}
		jc, _ := jacobianOf(t, p, s)
		cols := jc.cols
		if cols != len(v) {
			t.Fatalf("background %v: %d columns, want %d", bkg, cols, len(v))
		}
		jd := mat.NewDense(nt, cols, nil)
		for r := 0; r < nt; r++ {
			for q := 0; q < cols; q++ {
				jd.Set(r, q, jc.at(r, q)*v[q])
			}
		}
		var want mat.Dense
		want.Mul(jd, mat.NewDense(nt, cols, slices.Clone(jc.j)).T())
		s.Covariance = unfold.Full
		old := runtime.GOMAXPROCS(1)
		one := unfoldOrFail(t, p, s)
		runtime.GOMAXPROCS(2)
		res := unfoldOrFail(t, p, s)
		runtime.GOMAXPROCS(old)
		var scale float64
		for a := 0; a < nt; a++ {
			scale = math.Max(scale, math.Abs(want.At(a, a)))
		}
		for a := 0; a < nt; a++ {
			for b := 0; b < nt; b++ {
				got, w := res.Covariance.At(a, b), want.At(a, b)
				if math.Abs(got-w) > 1e-12*scale {
					t.Fatalf("%d × %d, background %v: V[%d][%d] = %v, gonum product %v", nt, c.nr, bkg, a, b, got, w)
				}
				if o := one.Covariance.At(a, b); math.Float64bits(o) != math.Float64bits(got) {
					t.Fatalf("%d × %d, background %v: V[%d][%d] = %v on 1 core, %v on 2", nt, c.nr, bkg, a, b, o, got)
				}
			}
		}
	}
}

// Each probe is the Jacobian-vector product J z of its own random z, also
// with smoothing and a propagated background variance (the dense Jacobian
// being checked against finite differences above).
func TestProbesAreJacobianVectorProducts(t *testing.T) {
	p := randomProblem(t, 12, 25, 60, 7, true)
	p.BackgroundVariance = p.Background
	s := &opts{Iterations: 5, Smoothing: &Smoothing{Neighbours: chainScheme(t, 25), Strength: 0.7}}
	jc, _ := jacobianOf(t, p, s)
	rs, _ := s.resolve()
	m := mustModel(t, p)
	sm, err := newSmoother(s.Smoothing, m.det)
	if err != nil {
		t.Fatal(err)
	}
	pr := newProbes(m, unfold.NewProbes(m.p, 0, 4, 3), false)
	if _, err := newIterator(m, sm).run(context.Background(), m.n, rs, pr); err != nil {
		t.Fatal(err)
	}
	nr := len(p.Data)
	for k := 0; k < 4; k++ {
		for j := 0; j < 25; j++ {
			var want float64
			for q := 0; q < nr; q++ {
				want += jc.at(j, q) * unfold.Sign(pr.signN[k], q) * math.Sqrt(p.Data[q])
				want += jc.at(j, nr+q) * unfold.Sign(pr.signB[k], q) * math.Sqrt(p.Background[q])
			}
			if math.Abs(pr.dmu[k][j]-want) > 1e-11*math.Max(1, math.Abs(want)) {
				t.Errorf("probe %d bin %d: %.15g, J z = %.15g", k, j, pr.dmu[k][j], want)
			}
		}
	}
}
