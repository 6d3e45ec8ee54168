package unfold_test

import (
	"context"
	"errors"
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"gonum.org/v1/gonum/mat"
)

// pairs is an independent small derived quantity written for the tests:
// the sums of neighbouring truth bins y_t = μ_2t + μ_2t+1 (a projection)
// or, with shape set, those sums normalised to one in each of two
// groups (the first and second half), y_t = s_t / S_k(t) with
// ∂y_t/∂s_u = (δ_tu − y_t)/S_k for u in the group of t (method.md §22
// Derived quantities).
type pairs struct {
	nt    int
	shape bool
}

func (q pairs) Len() int { return q.nt / 2 }

func (q pairs) group(t int) int { return 2 * t / q.Len() }

func (q pairs) Jacobian(mu []float64) *unfold.RowMatrix {
	m := q.Len()
	s := make([]float64, m)
	for t := range s {
		s[t] = mu[2*t] + mu[2*t+1]
	}
	sum := make([]float64, 2)
	for t, x := range s {
		sum[q.group(t)] += x
	}
	d := &unfold.RowMatrix{Rows: m, Cols: q.nt, Ptr: []int{0}}
	for t := range m {
		for g := range q.nt {
			u := g / 2
			if u >= m {
				continue
			}
			v := 0.0
			switch {
			case !q.shape && u == t:
				v = 1
			case q.shape && q.group(u) == q.group(t):
				S := sum[q.group(t)]
				v = -s[t] / S / S
				if u == t {
					v += 1 / S
				}
			}
			if v != 0 {
				d.Col = append(d.Col, g)
				d.Val = append(d.Val, v)
			}
		}
		d.Ptr = append(d.Ptr, len(d.Col))
	}
	return d
}

// single picks truth bins: y_t = μ_{bins[t]}, so that its derived
// variances are the per-bin variances of the same probes or samples.
type single struct {
	nt   int
	bins []int
}

func (q single) Len() int { return len(q.bins) }

func (q single) Jacobian([]float64) *unfold.RowMatrix {
	d := &unfold.RowMatrix{Rows: len(q.bins), Cols: q.nt, Ptr: []int{0}}
	for _, g := range q.bins {
		d.Col = append(d.Col, g)
		d.Val = append(d.Val, 1)
		d.Ptr = append(d.Ptr, len(d.Col))
	}
	return d
}

// sandwich returns D cov Dᵀ with gonum's dense products, the reference.
func sandwich(d *unfold.RowMatrix, cov mat.Symmetric) *mat.Dense {
	dd := d.Dense()
	var t, out mat.Dense
	t.Mul(dd, cov)
	out.Mul(&t, dd.T())
	return &out
}

// within reports whether every entry of got is within tol·sqrt(w_tt w_uu)
// of want.
func within(got mat.Symmetric, want mat.Matrix, tol float64) (bool, int, int) {
	n := got.SymmetricDim()
	for t := range n {
		for u := range n {
			s := math.Sqrt(math.Abs(want.At(t, t) * want.At(u, u)))
			if math.Abs(got.At(t, u)-want.At(t, u)) > tol*s {
				return false, t, u
			}
		}
	}
	return true, -1, -1
}

func derivedProblem(t *testing.T) (*unfold.Problem, []unfold.Derived) {
	p, _ := smeared(t, 12, 16, 4000, 2000)
	ds := []unfold.Derived{pairs{nt: 12}, pairs{nt: 12, shape: true}, single{nt: 12, bins: []int{0, 5, 11}}}
	p.Derived = ds
	return p, ds
}

func derivedUnfold(t *testing.T, p *unfold.Problem, s unfold.Settings) *unfold.Result {
	t.Helper()
	res, err := unfold.Unfold(context.Background(), p, &s, &bayes.Settings{Iterations: 4})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestDerivedWithoutFullCovariance checks that under per-bin variances
// every source gives the derived covariance D Cov Dᵀ of the full mode:
// exactly for the exact Jacobian, the response samples (the same
// samples in both modes) and the shifts, within the probes' precision
// for the probes (method.md §22 Derived quantities, §9 on the probes'
// precision √(2/S), §18 on the sources adding).
func TestDerivedWithoutFullCovariance(t *testing.T) {
	p, ds := derivedProblem(t)
	full := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Full, ResponseSamples: 40, Seed: 3})
	exact := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalExact, ResponseSamples: 40, Seed: 3})
	const probes = 4000
	probed := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalProbes, Probes: probes, Seed: 3})
	if exact.Covariance != nil || probed.Covariance != nil {
		t.Fatal("a full covariance under per-bin variances")
	}
	data, sim := full.Source(unfold.SourceData), full.Source(unfold.SourceSimulation)
	for i := range ds {
		d := full.DerivedJacobians[i]
		// Exact data source: D J diag(v) Jᵀ Dᵀ = D Cov Dᵀ (method.md §22).
		if ok, a, b := within(exact.Source(unfold.SourceData).Derived[i], sandwich(d, data.Covariance), 1e-10); !ok {
			t.Errorf("quantity %d: exact data source differs from D Cov Dᵀ at (%d,%d)", i, a, b)
		}
		// The same response samples: D Cov_samples Dᵀ (method.md §18, §22).
		if ok, a, b := within(exact.Source(unfold.SourceSimulation).Derived[i], sandwich(d, sim.Covariance), 1e-9); !ok {
			t.Errorf("quantity %d: response samples differ from D Cov Dᵀ at (%d,%d)", i, a, b)
		}
		// The total is the sum of the sources (method.md §18).
		if ok, a, b := within(exact.DerivedCovariance(i), sandwich(d, full.Covariance), 1e-9); !ok {
			t.Errorf("quantity %d: total differs from D Cov Dᵀ at (%d,%d)", i, a, b)
		}
		// Probes: each derived variance is a mean of S squares, relative
		// precision √(2/S) (method.md §9); 5 standard deviations.
		if ok, a, b := within(probed.Source(unfold.SourceData).Derived[i], sandwich(d, data.Covariance), 5*math.Sqrt(2.0/probes)); !ok {
			t.Errorf("quantity %d: probes differ from D Cov Dᵀ beyond their precision at (%d,%d)", i, a, b)
		}
	}
	// The picked bins' derived variances are the probes' own per-bin
	// variances: the same probes (method.md §9).
	pv, pd := probed.Source(unfold.SourceData).Variance, probed.Source(unfold.SourceData).Derived[2]
	for t2, g := range []int{0, 5, 11} {
		if math.Abs(pd.At(t2, t2)-pv[g]) > 1e-12*pv[g] {
			t.Errorf("probe variance of bin %d: derived %v, per-bin %v", g, pd.At(t2, t2), pv[g])
		}
	}

	// A shift: exactly (D d)(D d)ᵀ (method.md §21).
	varied := slices.Clone(exact.Estimate)
	for j := range varied {
		varied[j] *= 1 + 0.01*float64(j%5)
	}
	exact.AddSource(unfold.ShiftSource("scale", exact.Estimate, varied, exact.Determined, false))
	shift := exact.Source("scale")
	for i, d := range exact.DerivedJacobians {
		c := mat.NewSymDense(len(shift.Shift), nil)
		c.SymOuterK(1, mat.NewVecDense(len(shift.Shift), shift.Shift))
		if ok, a, b := within(shift.Derived[i], sandwich(d, c), 1e-12); !ok {
			t.Errorf("quantity %d: shift source differs from D d dᵀ Dᵀ at (%d,%d)", i, a, b)
		}
	}

	// A shape's covariance has (1, …, 1) over each group in its kernel:
	// 1ᵀ J = 0 (method.md §22), to rounding, for every source.
	for _, res := range []*unfold.Result{exact, probed} {
		c := res.DerivedCovariance(1)
		n := c.SymmetricDim()
		for k := range 2 {
			for u := range n {
				var s, scale float64
				for t2 := range n {
					if 2*t2/n == k {
						s += c.At(t2, u)
						scale += math.Abs(c.At(t2, u))
					}
				}
				if math.Abs(s) > 1e-12*scale {
					t.Errorf("shape group %d, column %d: sum %v of entries of size %v", k, u, s, scale)
				}
			}
		}
	}
}

// TestDerivedToysSameSamples checks that Poisson toys give the derived
// covariance from the same toys: a picked bin's derived variance is its
// per-bin variance (method.md §9, §22), and the derived covariance
// agrees with D Cov Dᵀ of the linearised full mode within the toys'
// precision √(2/(T−1)) and the first-order difference of the method.
func TestDerivedToysSameSamples(t *testing.T) {
	p, ds := derivedProblem(t)
	const toys = 1000
	res := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: unfold.DiagonalToys, Toys: toys, Seed: 5})
	full := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Full, Seed: 5})
	src := res.Source(unfold.SourceData)
	for t2, g := range []int{0, 5, 11} {
		if v := src.Derived[2].At(t2, t2); math.Abs(v-src.Variance[g]) > 1e-12*src.Variance[g] {
			t.Errorf("toy variance of bin %d: derived %v, per-bin %v", g, v, src.Variance[g])
		}
	}
	for i := range ds {
		if ok, a, b := within(src.Derived[i], sandwich(full.DerivedJacobians[i], full.Covariance), 6*math.Sqrt(2.0/(toys-1))); !ok {
			t.Errorf("quantity %d: toys differ from D Cov Dᵀ beyond their precision at (%d,%d)", i, a, b)
		}
	}
}

// TestDerivedSameBitsForAnyCores checks the determinism rule for the
// derived covariances of the exact Jacobian, probes, toys and response
// samples: GOMAXPROCS 1, 2 and 4 give the same bits (common practice:
// fixed streams per unit, summed in unit order).
func TestDerivedSameBitsForAnyCores(t *testing.T) {
	p, ds := derivedProblem(t)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, dm := range []unfold.DiagonalMethod{unfold.DiagonalExact, unfold.DiagonalProbes, unfold.DiagonalToys} {
		var ref *unfold.Result
		for _, procs := range []int{1, 2, 4} {
			runtime.GOMAXPROCS(procs)
			res := derivedUnfold(t, p, unfold.Settings{Covariance: unfold.Diagonal, DiagonalMethod: dm, Probes: 64, Toys: 30, ResponseSamples: 9, Seed: 7})
			if ref == nil {
				ref = res
				continue
			}
			for i := range ds {
				if !mat.Equal(res.DerivedCovariance(i), ref.DerivedCovariance(i)) {
					t.Errorf("%v, GOMAXPROCS %d: derived covariance %d differs from GOMAXPROCS 1", dm, procs, i)
				}
			}
		}
	}
}

// huge is a derived quantity too large for a dense covariance.
type huge struct{}

func (huge) Len() int                             { return 1 << 20 }
func (huge) Jacobian([]float64) *unfold.RowMatrix { panic("not reached") }

// TestDerivedTooLarge checks that a derived quantity whose dense
// covariance does not fit under the memory limit is refused with its
// size before the unfolding starts.
func TestDerivedTooLarge(t *testing.T) {
	p, _ := derivedProblem(t)
	p.Derived = append(p.Derived, huge{})
	_, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.Diagonal}, &bayes.Settings{Iterations: 4})
	var tl *unfold.TooLargeError
	// 4 matrices of 2²⁰ × 2²⁰ × 8 bytes, besides the small ones.
	if !errors.As(err, &tl) || tl.Bytes < 4*8<<40 || !strings.Contains(err.Error(), "number 4, has 1048576 bins") {
		t.Fatalf("got %v", err)
	}
	// Without an uncertainty computation nothing is propagated or refused.
	if _, err := unfold.Unfold(context.Background(), p, &unfold.Settings{Covariance: unfold.NoCovariance}, &bayes.Settings{Iterations: 4}); err != nil {
		t.Fatal(err)
	}
}
