package unfold

import (
	"context"
	"errors"
	"math"
	"testing"

	"github.com/desmear/desmear/sparse"
)

// binByBin is the bin-by-bin correction μ_j = (n_j − b_j) / R_jj for a
// diagonal response, a linear method whose Jacobian is known in closed
// form (derived here): dμ_j/dn_j = 1/R_jj, dμ_j/db_j = −1/R_jj, all
// other entries 0. It exercises the drivers through the Method seam
// only.
type binByBin struct{}

func (binByBin) Name() string    { return "bin-by-bin" }
func (binByBin) Validate() error { return nil }

func (binByBin) Fit(ctx context.Context, p *Prepared) (Fit, error) {
	f := &bbFit{p: p, r: make([]float64, p.TruthBins())}
	// R_jj = A_jj / G_j: the efficiency of a diagonal response.
	copy(f.r, p.Efficiency())
	f.est = f.solve(p.Data(), p.Background())
	f.folded = make([]float64, p.RecoBins())
	p.Fold(f.folded, f.est, make([]float64, p.TruthBins()))
	for i, b := range p.Background() {
		f.folded[i] += b
	}
	return f, nil
}

type bbFit struct {
	p              *Prepared
	r, est, folded []float64
}

func (f *bbFit) solve(n, b []float64) []float64 {
	mu := make([]float64, len(f.r))
	for j, r := range f.r {
		if r > 0 {
			mu[j] = n[j] / r
			if b != nil {
				mu[j] -= b[j] / r
			}
		}
	}
	return mu
}

func (f *bbFit) Estimate() []float64 { return f.est }
func (f *bbFit) Folded() []float64   { return f.folded }
func (f *bbFit) Details() any        { return nil }

func (f *bbFit) Jacobian(ctx context.Context, dst *Jacobian) error {
	nr := f.p.RecoBins()
	for j, r := range f.r {
		if r > 0 {
			dst.Data[j*dst.Cols+j] = 1 / r
			if dst.Cols > nr {
				dst.Data[j*dst.Cols+nr+j] = -1 / r
			}
		}
	}
	return nil
}

func (f *bbFit) Tangents(ctx context.Context, dst *Probes) error {
	for s := 0; s < dst.Len(); s++ {
		sn, sb := dst.Signs(s)
		t := dst.Tangent(s)
		for j, r := range f.r {
			if r > 0 {
				t[j] = Sign(sn, j) * dst.DataSD()[j] / r
				if sb != nil {
					t[j] -= Sign(sb, j) * dst.BackgroundSD()[j] / r
				}
			}
		}
	}
	return nil
}

type bbRunner struct{ f *bbFit }

func (r bbRunner) Run(ctx context.Context, n, b []float64) ([]float64, error) {
	if b == nil {
		b = r.f.p.Background()
	}
	return r.f.solve(n, b), nil
}

func (f *bbFit) NewToyRunner() ToyRunner { return bbRunner{f} }

// diagonalProblem has the response R = diag(eff) (one reco bin per truth
// bin) and data n.
func diagonalProblem(t *testing.T, eff, n []float64) *Problem {
	t.Helper()
	k := len(eff)
	colPtr, rowIdx, val, gen := make([]int, k+1), make([]int, k), make([]float64, k), make([]float64, k)
	for j, e := range eff {
		colPtr[j+1] = j + 1
		rowIdx[j] = j
		val[j] = 1000 * e
		gen[j] = 1000
	}
	a, err := sparse.NewMatrix(k, k, colPtr, rowIdx, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	return &Problem{Migrations: a, Generated: gen, Data: n}
}

// The drivers give the closed-form variances of a linear method:
// Var μ_j = var n_j / R_jj² (derived here from μ_j = n_j / R_jj), exactly
// from the Jacobian, exactly from Rademacher probes too (every probe has
// (dμ_j)² = var n_j / R_jj² when the Jacobian is diagonal), and within the
// toys' stated precision sqrt(2/(T−1)).
func TestDriversThroughTheSeam(t *testing.T) {
	eff := []float64{0.5, 0.25, 0.8, 0.4}
	n := []float64{100, 400, 64, 900}
	p := diagonalProblem(t, eff, n)
	for _, c := range []struct {
		name string
		s    Settings
		tol  float64
	}{
		{"full", Settings{Covariance: Full}, 1e-12},
		{"exact", Settings{Covariance: Diagonal, DiagonalMethod: DiagonalExact}, 1e-12},
		{"probes", Settings{Covariance: Diagonal, DiagonalMethod: DiagonalProbes, Probes: 7, Seed: 3}, 1e-12},
		{"toys", Settings{Covariance: Diagonal, DiagonalMethod: DiagonalToys, Toys: 4000, Seed: 3}, 4 * math.Sqrt(2.0/3999)},
	} {
		res, err := Unfold(context.Background(), p, &c.s, binByBin{})
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if res.Method != "bin-by-bin" {
			t.Errorf("%s: method %q", c.name, res.Method)
		}
		for j, e := range eff {
			if got, want := res.Estimate[j], n[j]/e; math.Abs(got-want) > 1e-12*want {
				t.Errorf("%s: estimate[%d] = %v, want %v", c.name, j, got, want)
			}
			want := n[j] / (e * e)
			got := res.Uncertainty[j] * res.Uncertainty[j]
			if math.Abs(got-want) > c.tol*want {
				t.Errorf("%s: variance[%d] = %v, want %v", c.name, j, got, want)
			}
		}
		if c.s.Covariance == Full && res.Covariance.At(0, 1) != 0 {
			t.Errorf("full: covariance[0][1] = %v, want 0", res.Covariance.At(0, 1))
		}
	}
}

// Prepare exposes the validated problem: efficiencies, 1/G, the
// determined bins, the fold R x and the back-projection Rᵀ y of a
// diagonal response (closed form, derived here: (R x)_j = eff_j x_j).
func TestPrepare(t *testing.T) {
	eff := []float64{0.5, 0, 0.8}
	p := diagonalProblem(t, []float64{0.5, 0.25, 0.8}, []float64{1, 0, 2})
	p.Migrations.Values()[1] = 0 // truth bin 1 has no migrations
	pr, err := Prepare(p, InModel)
	if err != nil {
		t.Fatal(err)
	}
	if u := pr.Undetermined(); len(u) != 1 || u[0] != 1 {
		t.Errorf("undetermined %v, want [1]", u)
	}
	x := []float64{2, 3, 5}
	fx, bx := make([]float64, 3), make([]float64, 3)
	pr.Fold(fx, x, make([]float64, 3))
	pr.BackProject(bx, x)
	for j, e := range eff {
		if pr.Efficiency()[j] != e || fx[j] != e*x[j] || bx[j] != e*x[j] {
			t.Errorf("bin %d: eff %v, R x %v, Rᵀ y %v; want %v, %v, %v", j, pr.Efficiency()[j], fx[j], bx[j], e, e*x[j], e*x[j])
		}
	}
	if pr.InvGenerated()[0] != 1.0/1000 || pr.InvGenerated()[1] != 0 {
		t.Errorf("1/G = %v", pr.InvGenerated())
	}
	p.Data = []float64{1, 2}
	var ie *InputError
	if _, err := Prepare(p, InModel); !errors.As(err, &ie) || ie.Field != "Data" {
		t.Errorf("short data: %v", err)
	}
}

// The text names of the modes round-trip and unknown names are refused.
func TestModeNames(t *testing.T) {
	for _, m := range CovarianceModes() {
		var back CovarianceMode
		text, err := m.MarshalText()
		if err != nil || back.UnmarshalText(text) != nil || back != m {
			t.Errorf("%v: %q %v -> %v", m, text, err, back)
		}
	}
	for _, m := range DiagonalMethods() {
		var back DiagonalMethod
		text, _ := m.MarshalText()
		if back.UnmarshalText(text) != nil || back != m {
			t.Errorf("%v -> %v", m, back)
		}
	}
	for _, m := range BackgroundModes() {
		var back BackgroundMode
		text, _ := m.MarshalText()
		if back.UnmarshalText(text) != nil || back != m {
			t.Errorf("%v -> %v", m, back)
		}
	}
	if InModel.String() != "model" || Full.String() != "full" || DiagonalToys.String() != "toys" {
		t.Error("names changed: they are those of result.json and the analysis file")
	}
	var m CovarianceMode
	if err := m.UnmarshalText([]byte("dense")); err == nil {
		t.Error("accepted an unknown covariance mode")
	}
}

// Resolve fills the defaults and names the field of an invalid value.
func TestResolve(t *testing.T) {
	r, err := (*Settings)(nil).Resolve()
	if err != nil || r.Probes != DefaultProbes || r.Toys != DefaultToys || r.MemoryLimit != DefaultMemoryLimit {
		t.Errorf("defaults: %+v %v", r, err)
	}
	for _, c := range []struct {
		s     Settings
		field string
	}{
		{Settings{Probes: 1}, "Probes"}, {Settings{Toys: -1}, "Toys"}, {Settings{MemoryLimit: -1}, "MemoryLimit"},
		{Settings{Covariance: 7}, "Covariance"}, {Settings{DiagonalMethod: -1}, "DiagonalMethod"}, {Settings{Background: 2}, "Background"},
	} {
		var se *SettingsError
		if _, err := c.s.Resolve(); !errors.As(err, &se) || se.Field != c.field {
			t.Errorf("%+v: %v, want field %s", c.s, err, c.field)
		}
	}
}
