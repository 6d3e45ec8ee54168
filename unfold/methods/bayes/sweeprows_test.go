package bayes

import (
	"context"
	"github.com/desmear/desmear/unfold"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// serialEM is a plain serial reference iteration written from the method
// in doc.go (D'Agostini 1995; Shepp and Vardi 1982), on the
// compressed-column arrays of the migrations with R_ij = A_ij/G_j formed
// explicitly, one bin after the other, math.Log for the log-likelihood.
// It returns μ(K), ν(K) (with the background, in both modes) and the
// log-likelihoods of μ(0)..μ(K). With subtract, the iteration runs on
// n' = max(n − b, 0) with b = 0 in ν. With probes, it also carries the
// Jacobian-vector products dμ = M z for z_i = s_i sqrt(var n_i), s_i = ±1
// (signs[s][i]; z_i = 0 where n − b was clipped), through the recursion
// of doc.go:
//
//	dμ' = (g/eps) dμ + (μ/eps) Rᵀ(z/ν − n (R dμ)/ν²),  dμ(0) = p Σ z / Σ eps p.
func serialEM(p *unfold.Problem, iterations int, subtract bool, signs [][]float64) (mu, nu, ll []float64, dmu [][]float64) {
	a := p.Migrations
	nr, nt := a.Dims()
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	r := make([]float64, len(val))
	eps := make([]float64, nt)
	for j := 0; j < nt; j++ {
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			r[k] = val[k] / p.Generated[j]
			eps[j] += r[k]
		}
	}
	n := slices.Clone(p.Data)
	b := p.Background
	if subtract && b != nil {
		for i := range n {
			n[i] = math.Max(n[i]-b[i], 0)
		}
		b = nil
	}
	prior := p.Prior
	if prior == nil {
		prior = p.Generated
	}
	var sn, sep float64
	for i, x := range n {
		sn += x
		if b != nil {
			sn -= b[i]
		}
	}
	for j := range eps {
		if eps[j] > 0 {
			sep += eps[j] * prior[j]
		}
	}
	mu = make([]float64, nt)
	for j := range mu {
		if eps[j] > 0 {
			mu[j] = prior[j] * sn / sep
		}
	}
	dmu = make([][]float64, len(signs))
	z := make([][]float64, len(signs))
	for s, sg := range signs {
		z[s] = make([]float64, nr)
		var sz float64
		for i := range z[s] {
			if subtract && p.Background != nil && p.Data[i] < p.Background[i] {
				continue // clipped: n' = 0 does not move with n
			}
			z[s][i] = sg[i] * math.Sqrt(p.Data[i])
			sz += z[s][i]
		}
		dmu[s] = make([]float64, nt)
		for j := range mu {
			if eps[j] > 0 {
				dmu[s][j] = prior[j] * sz / sep
			}
		}
	}
	nu = make([]float64, nr)
	y := make([]float64, nr)
	fold := func(dst, x []float64) {
		clear(dst)
		for j := 0; j < nt; j++ {
			for k := colPtr[j]; k < colPtr[j+1]; k++ {
				dst[rowIdx[k]] += r[k] * x[j]
			}
		}
	}
	back := func(j int, y []float64) float64 {
		var s float64
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			s += r[k] * y[rowIdx[k]]
		}
		return s
	}
	tf := make([]float64, nr)
	ty := make([]float64, nr)
	for k := 0; ; k++ {
		fold(nu, mu)
		var l float64
		for i := range nu {
			if b != nil {
				nu[i] += b[i]
			}
			y[i] = 0
			if nu[i] > 0 {
				y[i] = n[i] / nu[i]
				l += n[i]*math.Log(nu[i]) - nu[i]
			}
		}
		ll = append(ll, l)
		if k == iterations {
			break
		}
		for s := range dmu {
			fold(tf, dmu[s])
			for i := range ty {
				ty[i] = 0
				if nu[i] > 0 {
					ty[i] = z[s][i]/nu[i] - n[i]*tf[i]/(nu[i]*nu[i])
				}
			}
			for j := range dmu[s] {
				if eps[j] > 0 {
					dmu[s][j] = (back(j, y)*dmu[s][j] + mu[j]*back(j, ty)) / eps[j]
				}
			}
		}
		for j := range mu {
			if eps[j] > 0 {
				mu[j] *= back(j, y) / eps[j]
			}
		}
	}
	if subtract && p.Background != nil {
		for i := range nu {
			nu[i] += p.Background[i]
		}
	}
	return mu, nu, ll, dmu
}

// permutedRows returns p with its reco bins in a random order, so that
// every truth column reaches rows all over the spectrum: the sparse
// kernels then take their buffered path (no banded two-phase scatter).
func permutedRows(t *testing.T, p *unfold.Problem, seed uint64) *unfold.Problem {
	t.Helper()
	a := p.Migrations
	nr, nt := a.Dims()
	perm := rand.New(rand.NewPCG(seed, 11)).Perm(nr)
	colPtr, rowIdx, val := a.ColPtr(), a.RowIdx(), a.Values()
	ri := make([]int, len(rowIdx))
	v := make([]float64, len(val))
	for j := 0; j < nt; j++ {
		ks := make([]int, 0, colPtr[j+1]-colPtr[j])
		for k := colPtr[j]; k < colPtr[j+1]; k++ {
			ks = append(ks, k)
		}
		slices.SortFunc(ks, func(x, y int) int { return perm[rowIdx[x]] - perm[rowIdx[y]] })
		for q, k := range ks {
			ri[colPtr[j]+q] = perm[rowIdx[k]]
			v[colPtr[j]+q] = val[k]
		}
	}
	m, err := sparse.NewMatrix(nr, nt, slices.Clone(colPtr), ri, v, nil)
	if err != nil {
		t.Fatal(err)
	}
	q := &unfold.Problem{Migrations: m, Generated: p.Generated, Data: make([]float64, nr)}
	for i, x := range p.Data {
		q.Data[perm[i]] = x
	}
	if p.Background != nil {
		q.Background = make([]float64, nr)
		for i, x := range p.Background {
			q.Background[perm[i]] = x
		}
	}
	return q
}

// The iteration runs one SweepRows per step, with ν, n/ν and the
// log-likelihood formed per row range inside the sweep. Its estimates,
// folds, log-likelihoods and probe Jacobian-vector products agree with
// the plain serial reference iteration serialEM to 1e-12 (relative; 1e-10
// of the largest component for the probes), on matrices cut into several
// column blocks and row ranges (banded: the two-phase scatter; rows
// permuted: the buffered scatter), with 1 and 2 cores and bit-identical
// between them. serialEM itself is first checked against the gonum dense
// reference denseEM on small problems.
func TestSweepRowsPathAgainstSerialReference(t *testing.T) {
	for seed := uint64(1); seed <= 2; seed++ {
		for _, bkg := range []bool{false, true} {
			p := randomProblem(t, seed, 37, 81, 9, bkg)
			for _, k := range []int{1, 7} {
				mu, _, _, _ := serialEM(p, k, false, nil)
				if d := maxRelDiff(mu, denseEM(p, k)); d > 1e-12 {
					t.Errorf("seed %d bkg=%v K=%d: serial reference vs gonum dense reference %g", seed, bkg, k, d)
				}
			}
		}
	}

	banded := randomProblem(t, 3, 30000, 70000, 8, true)
	cases := []struct {
		name     string
		p        *unfold.Problem
		subtract bool
	}{
		{"banded", banded, false},
		{"banded, no background", randomProblem(t, 4, 30000, 70000, 8, false), false},
		{"banded, subtracted", banded, true},
		{"permuted rows", permutedRows(t, banded, 5), false},
	}
	old := runtime.GOMAXPROCS(0)
	defer runtime.GOMAXPROCS(old)
	const K, probes = 6, 2
	for _, c := range cases {
		if r := c.p.Migrations.RowRanges(); len(r) < 4 {
			t.Fatalf("%s: only %d row ranges; the test needs several", c.name, len(r)-1)
		}
		s := &opts{Iterations: K}
		if c.subtract {
			s.Background = unfold.Subtract
		}
		rs, err := s.resolve()
		if err != nil {
			t.Fatal(err)
		}
		m, err := prepare(c.p, s.Background)
		if err != nil {
			t.Fatal(err)
		}
		var first *unfold.Result
		var firstDmu [][]float64
		for _, procs := range []int{1, 2} {
			runtime.GOMAXPROCS(procs)
			res := unfoldOrFail(t, c.p, s)
			pr := newProbes(m, unfold.NewProbes(m.p, 0, probes, 7), true)
			if _, err := newIterator(m, nil).run(context.Background(), m.n, rs, pr); err != nil {
				t.Fatal(err)
			}
			if first == nil {
				first, firstDmu = res, pr.dmu
				continue
			}
			if !slices.Equal(res.Estimate, first.Estimate) || !slices.Equal(res.Folded, first.Folded) ||
				!slices.Equal(details(res).History, details(first).History) {
				t.Errorf("%s: results with 1 and 2 cores differ", c.name)
			}
			for q := range pr.dmu {
				if !slices.Equal(pr.dmu[q], firstDmu[q]) {
					t.Errorf("%s: probe %d differs with 1 and 2 cores", c.name, q)
				}
			}
		}
		ref := newProbes(m, unfold.NewProbes(m.p, 0, probes, 7), true) // the probes' own sign bits
		signs := make([][]float64, probes)
		for q := range signs {
			signs[q] = make([]float64, m.nr)
			for i := range signs[q] {
				signs[q][i] = unfold.Sign(ref.signN[q], i)
			}
		}
		mu, nu, ll, dmu := serialEM(c.p, K, c.subtract, signs)
		if d := maxRelDiff(first.Estimate, mu); d > 1e-12 {
			t.Errorf("%s: estimate vs serial reference: max relative difference %g", c.name, d)
		}
		if d := maxRelDiff(first.Folded, nu); d > 1e-12 {
			t.Errorf("%s: fold vs serial reference: max relative difference %g", c.name, d)
		}
		for k, st := range details(first).History {
			if !near(st.LogLikelihood, ll[k], 1e-12) {
				t.Errorf("%s: log-likelihood %d: %.17g, serial reference %.17g", c.name, k, st.LogLikelihood, ll[k])
			}
		}
		for q := range dmu {
			var scale, d float64
			for j, x := range dmu[q] {
				scale = math.Max(scale, math.Abs(x))
				d = math.Max(d, math.Abs(firstDmu[q][j]-x))
			}
			if d > 1e-10*scale {
				t.Errorf("%s: probe %d vs serial reference: max difference %g (scale %g)", c.name, q, d, scale)
			}
		}
	}
}
