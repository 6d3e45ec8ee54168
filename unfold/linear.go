package unfold

import (
	"context"
	"runtime"

	"github.com/desmear/desmear/unfold/internal/parallel"
)

// Solver applies the linear map K of a linear method, μ = K (n − b) + c
// (see NewLinearFit): Solve sets dst (truth-sized) to K y for a reco-sized
// y. dst must not alias y. A Solver keeps its own scratch and is used by
// one goroutine at a time.
type Solver interface {
	Solve(ctx context.Context, dst, y []float64) error
}

// NewLinearFit returns the Fit of a method whose estimate is linear in
// the data: μ = K (n − b) + c, with b the background inside the model
// (Prepared.Background, treated as 0 when nil) and c a constant
// truth-sized offset (nil for none). newSolver returns a new Solver of K
// each time it is called: one per goroutine. The Jacobian dμ/dn = K and
// dμ/db = −K is exact; Tangents apply K to the probes; toys re-apply it.
//
// Because the fit is linear, the uncertainty drivers need nothing else
// from the method: Jacobian column i is K e_i, computed on up to
// GOMAXPROCS goroutines, each column independently, so the bits do not
// depend on the number of cores.
func NewLinearFit(ctx context.Context, p *Prepared, newSolver func() Solver, offset []float64, details any) (Fit, error) {
	f := &linearFit{p: p, newSolver: newSolver, offset: offset, details: details}
	f.estimate = make([]float64, p.nt)
	if err := f.solve(ctx, newSolver(), f.estimate, p.n, p.b, make([]float64, p.nr)); err != nil {
		return nil, err
	}
	f.folded = make([]float64, p.nr)
	p.Fold(f.folded, f.estimate, make([]float64, p.nt))
	for i, b := range p.b {
		f.folded[i] += b
	}
	return f, nil
}

type linearFit struct {
	p                *Prepared
	newSolver        func() Solver
	offset           []float64
	details          any
	estimate, folded []float64
}

// solve sets dst = K (n − b) + c, with y as reco-sized scratch.
func (f *linearFit) solve(ctx context.Context, s Solver, dst, n, b, y []float64) error {
	copy(y, n)
	for i, x := range b {
		y[i] -= x
	}
	if err := s.Solve(ctx, dst, y); err != nil {
		return err
	}
	for j, c := range f.offset {
		dst[j] += c
	}
	for j, d := range f.p.det {
		if !d {
			dst[j] = 0
		}
	}
	return nil
}

func (f *linearFit) Estimate() []float64 { return f.estimate }
func (f *linearFit) Folded() []float64   { return f.folded }
func (f *linearFit) Details() any        { return f.details }

// Jacobian fills column i of dst with K e_i (and column RecoBins+i with
// −K e_i when the background variance is propagated).
func (f *linearFit) Jacobian(ctx context.Context, dst *Jacobian) error {
	nr, nt := f.p.nr, f.p.nt
	workers := min(runtime.GOMAXPROCS(0), nr)
	type slot struct {
		s      Solver
		y, col []float64
		err    error
	}
	slots := make([]slot, workers)
	for w := range slots {
		slots[w] = slot{s: f.newSolver(), y: make([]float64, nr), col: make([]float64, nt)}
	}
	for i0 := 0; i0 < nr; i0 += workers {
		if err := ctx.Err(); err != nil {
			return err
		}
		batch := min(workers, nr-i0)
		parallel.For(batch, batch, func(w int) {
			sl := &slots[w]
			i := i0 + w
			sl.y[i] = 1
			sl.err = sl.s.Solve(ctx, sl.col, sl.y)
			sl.y[i] = 0
			if sl.err != nil {
				return
			}
			for j, x := range sl.col {
				if !f.p.det[j] {
					x = 0
				}
				dst.Data[j*dst.Cols+i] = x
				if dst.Cols > nr {
					dst.Data[j*dst.Cols+nr+i] = -x
				}
			}
		})
		for w := 0; w < batch; w++ {
			if slots[w].err != nil {
				return slots[w].err
			}
		}
	}
	return nil
}

// Tangents sets dμ_s = K (dn_s − db_s) for every probe, the probes on
// up to GOMAXPROCS goroutines.
func (f *linearFit) Tangents(ctx context.Context, dst *Probes) error {
	nr := f.p.nr
	count := dst.Len()
	workers := min(runtime.GOMAXPROCS(0), count)
	solvers := make([]Solver, workers)
	ys := make([][]float64, workers)
	for w := range solvers {
		solvers[w], ys[w] = f.newSolver(), make([]float64, nr)
	}
	errs := make([]error, count)
	for s0 := 0; s0 < count; s0 += workers {
		batch := min(workers, count-s0)
		parallel.For(batch, batch, func(w int) {
			s := s0 + w
			y := ys[w]
			sn, sb := dst.Signs(s)
			for i, sd := range dst.DataSD() {
				y[i] = Sign(sn, i) * sd
			}
			for i, sd := range dst.BackgroundSD() {
				y[i] -= Sign(sb, i) * sd
			}
			t := dst.Tangent(s)
			if errs[s] = solvers[w].Solve(ctx, t, y); errs[s] != nil {
				return
			}
			for j, d := range f.p.det {
				if !d {
					t[j] = 0
				}
			}
		})
		for _, err := range errs[s0 : s0+batch] {
			if err != nil {
				return err
			}
		}
	}
	return nil
}

// NewToyRunner returns a runner applying K to pseudo-data.
func (f *linearFit) NewToyRunner() ToyRunner {
	return &linearRunner{f: f, s: f.newSolver(), y: make([]float64, f.p.nr), mu: make([]float64, f.p.nt)}
}

type linearRunner struct {
	f     *linearFit
	s     Solver
	y, mu []float64
}

func (r *linearRunner) Run(ctx context.Context, n, b []float64) ([]float64, error) {
	if b == nil {
		b = r.f.p.b
	}
	if err := r.f.solve(ctx, r.s, r.mu, n, b, r.y); err != nil {
		return nil, err
	}
	return r.mu, nil
}

// Weights returns W_ii = 1/V_ii for the least-squares methods, V_ii the
// variance of Data (DataVariance); a bin with no variance (a zero count
// with Poisson data, or a bin clipped in Subtract mode) gets V_ii = 1.
func (m *Prepared) Weights() []float64 {
	w := make([]float64, m.nr)
	for i, v := range m.varN {
		if v <= 0 {
			v = 1
		}
		w[i] = 1 / v
	}
	return w
}
