package derive

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/sparse"
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
)

// scheme2D is a region "central" with axes x (3 bins, widths 1, 2, 3,
// with an overflow) and y (4 bins, widths 0.5, 0.5, 1, 2), and a second
// region "forward" with one axis.
func scheme2D(t *testing.T) *binning.Scheme {
	t.Helper()
	x, err := binning.NewAxis("x", "GeV", []float64{0, 1, 3, 6}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	y, err := binning.NewAxis("y", "", []float64{0, 0.5, 1, 2, 4}, true, false)
	if err != nil {
		t.Fatal(err)
	}
	c, err := binning.NewRegion("central", x, y)
	if err != nil {
		t.Fatal(err)
	}
	z, err := binning.NewAxis("x", "GeV", []float64{0, 2, 5}, false, false)
	if err != nil {
		t.Fatal(err)
	}
	f, err := binning.NewRegion("forward", z)
	if err != nil {
		t.Fatal(err)
	}
	s, err := binning.NewScheme(f, c)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// randomCov returns a random positive definite covariance of dimension n
// (A Aᵀ + I for a random A).
func randomCov(n int, rng *rand.Rand) *mat.SymDense {
	a := mat.NewDense(n, n, nil)
	for i := range n {
		for j := range n {
			a.Set(i, j, rng.NormFloat64())
		}
	}
	c := mat.NewSymDense(n, nil)
	c.SymOuterK(1, a)
	for i := range n {
		c.SetSym(i, i, c.At(i, i)+1)
	}
	return c
}

// TestProjectionHandSums checks the projections of a known 2-D array
// against sums written out by hand (sum over y for each x bin, over x
// for each y bin; the flow bins and the other region left out), and
// the densities against the same sums divided by the widths and the
// luminosity (method.md §22 Derived quantities).
func TestProjectionHandSums(t *testing.T) {
	s := scheme2D(t)
	mu := make([]float64, s.Len())
	lo, _ := s.Span(1)
	// central bin (i, j) holds 10 i + j + 1.
	for i := range 3 {
		for j := range 4 {
			mu[lo+4*i+j] = float64(10*i + j + 1)
		}
	}
	// The other region and every flow bin hold values that must not
	// enter.
	for g := range mu {
		if g < lo || g >= lo+12 {
			mu[g] = 1000
		}
	}
	px, err := New(s, Spec{Name: "px", Region: "central", Axes: []string{"x"}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	// Hand sums: Σ_j (10 i + j + 1) = 40 i + 10.
	if got := px.Value(make([]float64, 3), mu); got[0] != 10 || got[1] != 50 || got[2] != 90 {
		t.Errorf("projection onto x: %v; want [10 50 90]", got)
	}
	py, err := New(s, Spec{Name: "py", Region: "central", Axes: []string{"y"}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	// Σ_i (10 i + j + 1) = 30 + 3 (j + 1).
	if got := py.Value(make([]float64, 4), mu); got[0] != 33 || got[1] != 36 || got[2] != 39 || got[3] != 42 {
		t.Errorf("projection onto y: %v; want [33 36 39 42]", got)
	}
	dy, err := New(s, Spec{Name: "dy", Region: "central", Kind: Density, Axes: []string{"y"}, DivideByWidths: []string{"y"}, Luminosity: true}, 2)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{33 / 0.5 / 2, 36 / 0.5 / 2, 39 / 1.0 / 2, 42 / 2.0 / 2}
	for i, v := range dy.Value(make([]float64, 4), mu) {
		if math.Abs(v-want[i]) > 1e-12*want[i] {
			t.Errorf("density bin %d: %v; want %v", i, v, want[i])
		}
	}
	// The 2-D density divided by the x widths only: bin (i, j) over w_x(i).
	d2, err := New(s, Spec{Name: "d2", Region: "central", Kind: Density, DivideByWidths: []string{"x"}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	wx := []float64{1, 2, 3}
	for tb, v := range d2.Value(make([]float64, 12), mu) {
		i, j := tb/4, tb%4
		if w := float64(10*i+j+1) / wx[i]; math.Abs(v-w) > 1e-12*w {
			t.Errorf("2-D density bin (%d,%d): %v; want %v", i, j, v, w)
		}
	}
}

// TestCovarianceAgainstDense checks Covariance against D cov Dᵀ formed
// with gonum's dense products from the Jacobian D, for every kind (the
// definition of linear propagation, method.md §22 Derived quantities),
// and the Jacobian of a shape against central finite differences of
// Value.
func TestCovarianceAgainstDense(t *testing.T) {
	s := scheme2D(t)
	rng := rand.New(rand.NewPCG(7, 1))
	n := s.Len()
	mu := make([]float64, n)
	for g := range mu {
		mu[g] = 50 + 100*rng.Float64()
	}
	cov := randomCov(n, rng)
	specs := []Spec{
		{Name: "p", Region: "central", Axes: []string{"x"}},
		{Name: "p2", Region: "central"},
		{Name: "d", Region: "central", Kind: Density, DivideByWidths: []string{"x", "y"}, Luminosity: true},
		{Name: "s", Region: "central", Kind: Shape, Axes: []string{"y"}},
		{Name: "sw", Region: "central", Kind: Shape, PerSlice: []string{"x"}, DivideByWidths: []string{"y"}},
		{Name: "sf", Region: "forward", Kind: Shape, DivideByWidths: []string{"x"}},
	}
	for _, sp := range specs {
		q, err := New(s, sp, 3.5)
		if err != nil {
			t.Fatal(err)
		}
		m := q.Len()
		d := q.Jacobian(mu).Dense()
		var dc, want mat.Dense
		dc.Mul(d, cov)
		want.Mul(&dc, d.T())
		got := q.Covariance(nil, mu, cov)
		scale := mat.Max(&want)
		for i := range m {
			for j := range m {
				if math.Abs(got.At(i, j)-want.At(i, j)) > 1e-12*scale {
					t.Errorf("%s: covariance (%d,%d) %v; D cov Dᵀ gives %v", sp.Name, i, j, got.At(i, j), want.At(i, j))
				}
			}
		}
		// Central differences of Value along random directions (exact
		// for the linear kinds, O(h²) for a shape).
		for range 3 {
			v := make([]float64, n)
			for g := range v {
				v[g] = rng.NormFloat64()
			}
			const h = 1e-4
			up, dn := make([]float64, n), make([]float64, n)
			for g := range v {
				up[g], dn[g] = mu[g]+h*v[g], mu[g]-h*v[g]
			}
			yu, yd := q.Value(make([]float64, m), up), q.Value(make([]float64, m), dn)
			var dv mat.VecDense
			dv.MulVec(d, mat.NewVecDense(n, v))
			for i := range m {
				fd := (yu[i] - yd[i]) / (2 * h)
				if math.Abs(fd-dv.AtVec(i)) > 1e-6*(math.Abs(fd)+1e-3) {
					t.Errorf("%s bin %d: D v = %v, finite difference %v", sp.Name, i, dv.AtVec(i), fd)
				}
			}
		}
	}
}

// TestShapeKernel checks that the covariance of a normalised shape has
// (1, ..., 1) in its kernel over each normalisation group (Σ_t y_t = 1
// in each group, so 1ᵀ J = 0: method.md §22 Derived quantities), and
// the width vector w when the widths divide (Σ_t w_t y_t = 1), to
// rounding; and that the covariance of a projection is not singular.
func TestShapeKernel(t *testing.T) {
	s := scheme2D(t)
	rng := rand.New(rand.NewPCG(11, 2))
	n := s.Len()
	mu := make([]float64, n)
	for g := range mu {
		mu[g] = 10 + 90*rng.Float64()
	}
	cov := randomCov(n, rng)
	for _, sp := range []Spec{
		{Name: "whole", Region: "central", Kind: Shape},
		{Name: "sliced", Region: "central", Kind: Shape, PerSlice: []string{"x"}},
		{Name: "widths", Region: "central", Kind: Shape, PerSlice: []string{"y"}, DivideByWidths: []string{"x"}},
	} {
		q, err := New(s, sp, 0)
		if err != nil {
			t.Fatal(err)
		}
		if !q.Singular() {
			t.Errorf("%s: a shape not marked singular", sp.Name)
		}
		c := q.Covariance(nil, mu, cov)
		m := q.Len()
		scale := 0.0
		for i := range m {
			scale = math.Max(scale, c.At(i, i))
		}
		for k := range q.Groups() {
			for i := range m {
				sum := 0.0
				for j := range m {
					if q.Group(j) == k {
						sum += q.Divisor(j) * c.At(i, j)
					}
				}
				if math.Abs(sum) > 1e-13*scale*float64(m) {
					t.Errorf("%s: group %d: (C w)_%d = %g; want 0 (scale %g)", sp.Name, k, i, sum, scale)
				}
			}
		}
		if k := q.Groups(); sp.Name == "sliced" && k != 3 || sp.Name == "widths" && k != 4 || sp.Name == "whole" && k != 1 {
			t.Errorf("%s: %d groups", sp.Name, k)
		}
	}
	// A projection's covariance is positive definite here (P of full
	// rank, cov positive definite): its Cholesky factorisation exists.
	q, err := New(s, Spec{Name: "p", Region: "central"}, 0)
	if err != nil {
		t.Fatal(err)
	}
	var ch mat.Cholesky
	if !ch.Factorize(q.Covariance(nil, mu, cov)) {
		t.Error("the covariance of a projection is not positive definite")
	}
}

// toyProblem is a 2-D problem on scheme2D with a migration of 20 % to
// each neighbour in the global order and an efficiency of 0.8; the data
// are the folded truth, large enough for the linearisation to hold.
func toyProblem(t *testing.T, s *binning.Scheme) *unfold.Problem {
	t.Helper()
	n := s.Len()
	truth := make([]float64, n)
	for g := range truth {
		truth[g] = 4000 + 500*float64(g%5)
	}
	ptr := []int{0}
	var row []int
	var val []float64
	for j := range n {
		for _, i := range []int{j - 1, j, j + 1} {
			if i < 0 || i >= n {
				continue
			}
			f := 0.2
			if i == j {
				f = 0.4
			}
			row = append(row, i)
			val = append(val, 1e3*f)
		}
		ptr = append(ptr, len(row))
	}
	a, err := sparse.NewMatrix(n, n, ptr, row, val, nil)
	if err != nil {
		t.Fatal(err)
	}
	gen := make([]float64, n)
	for j := range n {
		gen[j] = 1e3
	}
	data := make([]float64, n)
	a.Fold(data, truth)
	for i := range data {
		data[i] /= 1e3
	}
	return &unfold.Problem{Migrations: a, Generated: gen, Data: data}
}

// TestProjectedToys checks the covariance of a projection and of a
// shape, propagated with the Jacobian from the exact linearised
// covariance of the iterative method, against the sample covariance of
// the same quantities computed from Poisson pseudo-data unfolded by
// the method's toy runner (fixed seed), within four standard errors of
// a sample covariance, sqrt((C_ii C_jj + C_ij²)/(T−1)) (the variance of
// the sample covariance of Gaussian variables, from memory), plus a small
// allowance for the nonlinearity of the method.
func TestProjectedToys(t *testing.T) {
	s := scheme2D(t)
	p := toyProblem(t, s)
	method := &bayes.Settings{Iterations: 4}
	ctx := context.Background()
	res, err := unfold.Unfold(ctx, p, &unfold.Settings{Covariance: unfold.Full}, method)
	if err != nil {
		t.Fatal(err)
	}
	prep, err := unfold.Prepare(p, unfold.InModel)
	if err != nil {
		t.Fatal(err)
	}
	fit, err := method.Fit(ctx, prep)
	if err != nil {
		t.Fatal(err)
	}
	run := fit.NewToyRunner()
	quantities := []Spec{
		{Name: "px", Region: "central", Axes: []string{"x"}},
		{Name: "dy", Region: "central", Kind: Density, Axes: []string{"y"}, DivideByWidths: []string{"y"}},
		{Name: "shape", Region: "central", Kind: Shape, PerSlice: []string{"x"}},
	}
	var qs []*Quantity
	var ens []*unfold.Ensemble
	for _, sp := range quantities {
		q, err := New(s, sp, 0)
		if err != nil {
			t.Fatal(err)
		}
		qs = append(qs, q)
		ens = append(ens, unfold.NewEnsemble(q.Len(), true))
	}
	const toys = 3000
	src := rand.NewPCG(2026, 12)
	n := make([]float64, len(p.Data))
	for range toys {
		for i, x := range p.Data {
			n[i] = distuv.Poisson{Lambda: x, Src: src}.Rand()
		}
		est, err := run.Run(ctx, n, nil)
		if err != nil {
			t.Fatal(err)
		}
		for k, q := range qs {
			ens[k].Add(q.Value(make([]float64, q.Len()), est))
		}
	}
	for k, q := range qs {
		lin := q.Covariance(nil, res.Estimate, res.Covariance)
		toy := ens[k].Covariance(nil)
		m := q.Len()
		for i := range m {
			for j := range m {
				se := math.Sqrt((lin.At(i, i)*lin.At(j, j) + lin.At(i, j)*lin.At(i, j)) / (toys - 1))
				if d := math.Abs(toy.At(i, j) - lin.At(i, j)); d > 4*se+0.02*math.Sqrt(lin.At(i, i)*lin.At(j, j)) {
					t.Errorf("%s (%d,%d): toys %g, Jacobian %g (standard error %g)", quantities[k].Name, i, j, toy.At(i, j), lin.At(i, j), se)
				}
			}
		}
	}
}

// TestSpecErrors checks that every malformed specification is refused
// with the field named.
func TestSpecErrors(t *testing.T) {
	s := scheme2D(t)
	for _, c := range []struct {
		spec  Spec
		lumi  float64
		field string
	}{
		{Spec{Name: "", Region: "central"}, 0, "name"},
		{Spec{Name: "a/b", Region: "central"}, 0, "name"},
		{Spec{Name: "a", Region: "nowhere"}, 0, "region"},
		{Spec{Name: "a", Region: "central", Axes: []string{"z"}}, 0, "axes"},
		{Spec{Name: "a", Region: "central", Axes: []string{"y", "x"}}, 0, "axes"},
		{Spec{Name: "a", Region: "central", Axes: []string{"x", "x"}}, 0, "axes"},
		{Spec{Name: "a", Region: "central", Kind: Density}, 0, "divide_by_widths"},
		{Spec{Name: "a", Region: "central", Kind: Projection, DivideByWidths: []string{"x"}}, 0, "divide_by_widths"},
		{Spec{Name: "a", Region: "central", Kind: Density, Axes: []string{"x"}, DivideByWidths: []string{"y"}}, 0, "divide_by_widths"},
		{Spec{Name: "a", Region: "central", Kind: Shape, Luminosity: true}, 1, "luminosity"},
		{Spec{Name: "a", Region: "central", Luminosity: true}, 0, "luminosity"},
		{Spec{Name: "a", Region: "central", PerSlice: []string{"x"}}, 0, "per_slice"},
		{Spec{Name: "a", Region: "central", Kind: Shape, Axes: []string{"x"}, PerSlice: []string{"x"}}, 0, "per_slice"},
		{Spec{Name: "a", Region: "central", Kind: Kind(7)}, 0, "kind"},
	} {
		_, err := New(s, c.spec, c.lumi)
		se, ok := err.(*SpecError)
		if !ok || se.Field != c.field {
			t.Errorf("%+v: error %v; want one on %s", c.spec, err, c.field)
		}
	}
	var k Kind
	if err := k.UnmarshalText([]byte("slice")); err == nil {
		t.Error("an unknown kind accepted")
	}
}

// TestEdgesByBin checks a triple-differential region whose pt edges
// depend on the y bin: the projection onto (y, pt) summing the mass is
// the hand sum over the in-range mass bins of each (y, pt) bin (found by
// the reverse lookup Scheme.Bin), the shape per y slice sums to one in
// each slice with its covariance equal to gonum's D cov Dᵀ and with the
// ones of each slice in its kernel (method.md §22 Derived quantities);
// summing over y while keeping pt, and slicing by pt without y, are
// refused.
func TestEdgesByBin(t *testing.T) {
	s, err := binning.ReadFile("../../testdata/scheme3d.yaml")
	if err != nil {
		t.Fatal(err)
	}
	n := s.Len()
	rng := rand.New(rand.NewPCG(3, 3))
	mu := make([]float64, n)
	for g := range mu {
		mu[g] = 1 + 9*rng.Float64()
	}
	q, err := New(s, Spec{Name: "ypt", Region: "signal", Axes: []string{"y", "pt"}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	// y0 has 3 pt bins and y1 two.
	if q.Len() != 5 {
		t.Fatalf("%d bins; want 5", q.Len())
	}
	want := make([]float64, 5)
	first := []int{0, 3}
	for g := range n {
		b := s.Bin(g)
		if b.RegionName != "signal" || b.Flow {
			continue
		}
		want[first[b.Index[0]]+b.Index[1]] += mu[g]
	}
	got := q.Value(make([]float64, 5), mu)
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-12*want[i] {
			t.Errorf("projection bin %d: %v; want %v", i, got[i], want[i])
		}
	}
	sh, err := New(s, Spec{Name: "shape", Region: "signal", Kind: Shape, Axes: []string{"y", "pt"}, PerSlice: []string{"y"}}, 0)
	if err != nil {
		t.Fatal(err)
	}
	y := sh.Value(make([]float64, 5), mu)
	if a, b := y[0]+y[1]+y[2], y[3]+y[4]; math.Abs(a-1) > 1e-14 || math.Abs(b-1) > 1e-14 {
		t.Errorf("slices sum to %v and %v", a, b)
	}
	cov := randomCov(n, rng)
	c := sh.Covariance(nil, mu, cov)
	d := sh.Jacobian(mu).Dense()
	var dc, ref mat.Dense
	dc.Mul(d, cov)
	ref.Mul(&dc, d.T())
	for i := range 5 {
		for j := range 5 {
			if math.Abs(c.At(i, j)-ref.At(i, j)) > 1e-12*mat.Max(&ref) {
				t.Errorf("shape covariance (%d,%d): %v; D cov Dᵀ %v", i, j, c.At(i, j), ref.At(i, j))
			}
		}
		if k0, k1 := c.At(i, 0)+c.At(i, 1)+c.At(i, 2), c.At(i, 3)+c.At(i, 4); math.Abs(k0) > 1e-13*mat.Max(&ref) || math.Abs(k1) > 1e-13*mat.Max(&ref) {
			t.Errorf("row %d: slice sums %g, %g; want 0", i, k0, k1)
		}
	}
	for _, sp := range []Spec{
		{Name: "pt", Region: "signal", Axes: []string{"pt"}},
		{Name: "s", Region: "signal", Kind: Shape, Axes: []string{"y", "pt"}, PerSlice: []string{"pt"}},
	} {
		if _, err := New(s, sp, 0); err == nil {
			t.Errorf("%s accepted", sp.Name)
		} else if se, ok := err.(*SpecError); !ok || (sp.Name == "pt") != (se.Field == "axes") {
			t.Errorf("%s: %v", sp.Name, err)
		}
	}
}
