package bayes

import (
	"context"
	"errors"
	"math"
	"slices"
	"testing"

	"github.com/desmear/desmear/unfold"
)

// The reused unfolder is a rearrangement of the allocations of
// unfold.Unfold, not another computation: every result must be the same
// bits as a fresh Unfold call on the same inputs (whose values the
// oracle tests check against D'Agostini, Nucl. Instrum. Meth. A 362
// (1995) 487, eq. 4, through method.md §2), for new data, a new prior and
// a new response value array of the same pattern.
func TestUnfolderMatchesUnfold(t *testing.T) {
	ctx := context.Background()
	cases := []struct {
		name string
		bkg  bool
		s    opts
	}{
		{"fixed", false, opts{Iterations: 4}},
		{"in-model background", true, opts{Iterations: 3}},
		{"subtract, stop rule", true, opts{StopChi2: 1e-4, MaxIterations: 30, Background: unfold.Subtract}},
		{"smoothing", false, opts{Iterations: 3, Smoothing: &Smoothing{Neighbours: chainScheme(t, 300)}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := randomProblem(t, 11, 300, 700, 7, c.bkg)
			if c.bkg {
				// a large background in a few bins, so that Subtract clips
				for i := 0; i < len(p.Background); i += 97 {
					p.Background[i] = p.Data[i] + 5
				}
			}
			cs, cm := c.s.split()
			rs, err := cs.Resolve()
			if err != nil {
				t.Fatal(err)
			}
			pr, err := unfold.Prepare(p, rs.Background)
			if err != nil {
				t.Fatal(err)
			}
			u, err := NewUnfolder(pr, cm)
			if err != nil {
				t.Fatal(err)
			}
			dst := make([]float64, pr.TruthBins())
			folded := make([]float64, pr.RecoBins())
			check := func(what string, q *unfold.Problem) {
				t.Helper()
				want, err := unfold.Unfold(ctx, q, cs, cm)
				if err != nil {
					t.Fatal(err)
				}
				for rep := 0; rep < 2; rep++ { // a repeated call gives the same bits
					d, err := u.Unfold(ctx, dst, folded)
					if err != nil {
						t.Fatal(err)
					}
					if !slices.Equal(dst, want.Estimate) || !slices.Equal(folded, want.Folded) {
						t.Fatalf("%s, call %d: results differ from Unfold (max rel. diff %g)", what, rep, maxRelDiff(dst, want.Estimate))
					}
					wd := DetailsOf(want)
					if !slices.Equal(d.History, wd.History) || d.Iterations != wd.Iterations || d.StoppedBy != wd.StoppedBy {
						t.Fatalf("%s, call %d: details differ: %+v, want %+v", what, rep, d, wd)
					}
				}
			}
			check("as prepared", p)

			// new data: a Poisson-like replica
			q := *p
			q.Data = slices.Clone(p.Data)
			for i := range q.Data {
				q.Data[i] = math.Round(q.Data[i] * (1 + 0.1*math.Sin(float64(i))))
			}
			if err := pr.SetData(q.Data, nil); err != nil {
				t.Fatal(err)
			}
			check("new data", &q)

			// new prior
			q.Prior = make([]float64, pr.TruthBins())
			for j := range q.Prior {
				q.Prior[j] = 1 + float64(j%13)
			}
			if err := pr.SetPrior(q.Prior); err != nil {
				t.Fatal(err)
			}
			check("new prior", &q)

			// new response values of the same pattern; one column emptied
			val := slices.Clone(p.Migrations.Values())
			colPtr := p.Migrations.ColPtr()
			for k := range val {
				val[k] *= 0.9 + 0.2*math.Cos(float64(k))
			}
			for k := colPtr[5]; k < colPtr[6]; k++ {
				val[k] = 0
			}
			a, err := p.Migrations.WithValues(val, nil)
			if err != nil {
				t.Fatal(err)
			}
			q.Migrations = a
			q.Generated = slices.Clone(p.Generated)
			q.Generated[7] *= 1.5
			if err := pr.SetResponse(a, q.Generated); err != nil {
				t.Fatal(err)
			}
			check("new response values", &q)
		})
	}
}

// The Set methods validate like Prepare.
func TestPreparedSetErrors(t *testing.T) {
	p := randomProblem(t, 12, 50, 120, 5, false)
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	var ie *unfold.InputError
	bad := slices.Clone(p.Data)
	bad[3] = -1
	if err := pr.SetData(bad, nil); !errors.As(err, &ie) || ie.Field != "Data" || ie.Reco != 3 {
		t.Errorf("negative data: got %v", err)
	}
	if err := pr.SetData(make([]float64, len(p.Data)), nil); !errors.As(err, &ie) || ie.Field != "Data" {
		t.Errorf("zero data: got %v", err)
	}
	if err := pr.SetPrior(make([]float64, 50)); !errors.As(err, &ie) || ie.Field != "Prior" {
		t.Errorf("zero prior: got %v", err)
	}
	other := randomProblem(t, 12, 50, 120, 6, false)
	if err := pr.SetResponse(other.Migrations, other.Generated); !errors.As(err, &ie) || ie.Field != "Migrations" {
		t.Errorf("other pattern: got %v", err)
	}
	gen := slices.Clone(p.Generated)
	gen[4] = 0
	if err := pr.SetResponse(p.Migrations, gen); !errors.As(err, &ie) || ie.Field != "Generated" || ie.Truth != 4 {
		t.Errorf("zero generated count: got %v", err)
	}
}

// unfolderAllocs returns the allocations of one repeated unfolding of a
// problem of nt truth bins, 4 iterations.
func unfolderAllocs(t *testing.T, nt int) float64 {
	p := randomProblem(t, 13, nt, 2*nt, 9, true)
	pr, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	u, err := NewUnfolder(pr, &Settings{Iterations: 4})
	if err != nil {
		t.Fatal(err)
	}
	dst, folded := make([]float64, nt), make([]float64, 2*nt)
	ctx := context.Background()
	return testing.AllocsPerRun(5, func() {
		if err := pr.SetData(p.Data, nil); err != nil {
			t.Fatal(err)
		}
		if _, err := u.Unfold(ctx, dst, folded); err != nil {
			t.Fatal(err)
		}
	})
}

// A repeated unfolding allocates no vector: the count is a small
// constant (the start of the parallel element-wise passes, a few words
// each) that does not grow with the problem.
func TestUnfolderAllocations(t *testing.T) {
	small, large := unfolderAllocs(t, 2000), unfolderAllocs(t, 200000)
	t.Logf("allocations per repeated unfolding: %v (2,000 truth bins), %v (200,000)", small, large)
	const budget = 16 // measured 9 with 4 iterations on 2 cores; see BENCHMARKS.md
	if large > budget || small > budget {
		t.Errorf("allocations per repeated unfolding: %v and %v, want at most %d", small, large, budget)
	}
}

// Probes in blocks are the same computation as probes one by one
// (SweepBlock sums each vector as Sweep does): the same bits for every
// probe, with and without a propagated background variance and with a
// last block of fewer probes. The one-by-one path is checked against the
// dense Jacobian (method.md §4) by TestProbesAreJacobianVectorProducts.
func TestProbeBlocksMatchOneByOne(t *testing.T) {
	for _, bkgVar := range []bool{true, false} {
		p := randomProblem(t, 14, 400, 900, 8, true)
		if bkgVar {
			p.BackgroundVariance = p.Background
		}
		m, err := prepare(p, unfold.InModel)
		if err != nil {
			t.Fatal(err)
		}
		rs, _ := (&opts{Iterations: 4}).resolve()
		const n = 2*unfold.ProbeBlock + 3
		run := func(blocked bool) [][]float64 {
			pr := newProbes(m, unfold.NewProbes(m.p, 5, n, 21), blocked)
			if _, err := newIterator(m, nil).run(context.Background(), m.n, rs, pr); err != nil {
				t.Fatal(err)
			}
			return pr.dmu
		}
		one, blk := run(false), run(true)
		for s := range one {
			if !slices.Equal(one[s], blk[s]) {
				t.Fatalf("background variance %v, probe %d: blocks give other bits than one by one (max rel. diff %g)", bkgVar, s, maxRelDiff(one[s], blk[s]))
			}
		}
	}
}

// Without the log-likelihood the iteration is the same computation less
// one sum: the estimate, the folded spectrum, the χ² and the change of
// every step, the number of iterations and the stopping reason must be
// the bits of a fresh unfold.Unfold call (whose values the oracle tests
// check against D'Agostini, Nucl. Instrum. Meth. A 362 (1995) 487, eq. 4,
// through method.md §2), and every log-likelihood 0; switched back on,
// the details are Unfold's again.
func TestUnfolderWithoutLogLikelihood(t *testing.T) {
	ctx := context.Background()
	cases := []struct {
		name string
		bkg  bool
		s    opts
	}{
		{"fixed", false, opts{Iterations: 4}},
		{"in-model background", true, opts{Iterations: 3}},
		{"stop rule", true, opts{StopChi2: 1e-4, MaxIterations: 30}},
		{"smoothing", false, opts{Iterations: 3, Smoothing: &Smoothing{Neighbours: chainScheme(t, 300)}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p := randomProblem(t, 13, 300, 700, 7, c.bkg)
			cs, cm := c.s.split()
			rs, err := cs.Resolve()
			if err != nil {
				t.Fatal(err)
			}
			pr, err := unfold.Prepare(p, rs.Background)
			if err != nil {
				t.Fatal(err)
			}
			u, err := NewUnfolder(pr, cm)
			if err != nil {
				t.Fatal(err)
			}
			want, err := unfold.Unfold(ctx, p, cs, cm)
			if err != nil {
				t.Fatal(err)
			}
			wd := DetailsOf(want)
			dst := make([]float64, pr.TruthBins())
			folded := make([]float64, pr.RecoBins())
			u.RecordLogLikelihood(false)
			d, err := u.Unfold(ctx, dst, folded)
			if err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(dst, want.Estimate) || !slices.Equal(folded, want.Folded) {
				t.Fatalf("results differ from Unfold (max rel. diff %g)", maxRelDiff(dst, want.Estimate))
			}
			if d.Iterations != wd.Iterations || d.StoppedBy != wd.StoppedBy || len(d.History) != len(wd.History) {
				t.Fatalf("stopping differs: %d %s, want %d %s", d.Iterations, d.StoppedBy, wd.Iterations, wd.StoppedBy)
			}
			for k, s := range d.History {
				w := wd.History[k]
				if s.LogLikelihood != 0 || s.Chi2 != w.Chi2 || s.Change != w.Change || s.Iteration != w.Iteration {
					t.Fatalf("step %d: %+v, want %+v without its log-likelihood", k, s, w)
				}
			}
			u.RecordLogLikelihood(true)
			if d, err = u.Unfold(ctx, dst, folded); err != nil {
				t.Fatal(err)
			}
			if !slices.Equal(d.History, wd.History) {
				t.Fatalf("log-likelihood on again: details differ: %+v, want %+v", d.History, wd.History)
			}
		})
	}
}
