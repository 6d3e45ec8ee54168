package binning

import (
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestProjectSlice2D checks projections and slices of
// testdata/scheme2d.yaml against maps written out by hand.
func TestProjectSlice2D(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	// Sum over pt: the central bins 0-3, 4-6, 7-8 form the three y bins.
	p, err := s.Project(0, 1)
	if err != nil {
		t.Fatal(err)
	}
	want := []int{0, 0, 0, 0, 1, 1, 1, 2, 2, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1}
	if !slices.Equal(p.Map, want) {
		t.Errorf("Project(central, pt).Map = %v, want %v", p.Map, want)
	}
	if got := p.Target.Label(1); got != "central y[0.5,1)" {
		t.Errorf("target bin 1 = %q", got)
	}
	// The pt spectrum in the second rapidity slice.
	sl, err := s.Slice(0, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	want = []int{-1, -1, -1, -1, 0, 1, 2, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1, -1}
	if !slices.Equal(sl.Map, want) {
		t.Errorf("Slice(central, y, 1).Map = %v, want %v", sl.Map, want)
	}
	if e := sl.Target.Regions()[0].Axes()[0].Edges(); !slices.Equal(e, []float64{20, 30, 50, 90}) {
		t.Errorf("slice edges %v", e)
	}
	// Forward region, sum over y.
	p, err = s.Project(1, 0)
	if err != nil {
		t.Fatal(err)
	}
	want = []int{-1, -1, -1, -1, -1, -1, -1, -1, -1, 0, 1, 0, 1, -1, -1, -1, -1, -1, -1, -1}
	if !slices.Equal(p.Map, want) {
		t.Errorf("Project(forward, y).Map = %v, want %v", p.Map, want)
	}
	x, _ := NewAxis("x", "", []float64{0, 1, 2}, false, false)
	r1, _ := NewRegion("line", x)
	one, _ := NewScheme(r1)
	for _, c := range []struct {
		name string
		f    func() (*Projection, error)
	}{
		{"sum over the axis pt's edges depend on", func() (*Projection, error) { return s.Project(0, 0) }},
		{"sum over everything", func() (*Projection, error) { return s.Project(0, 0, 1) }},
		{"repeated axis", func() (*Projection, error) { return s.Project(0, 1, 1) }},
		{"axis out of range", func() (*Projection, error) { return s.Project(0, 2) }},
		{"region out of range", func() (*Projection, error) { return s.Project(2, 0) }},
		{"slice an edges-by-bin axis", func() (*Projection, error) { return s.Slice(0, 1, 0) }},
		{"slice bin out of range", func() (*Projection, error) { return s.Slice(0, 0, 3) }},
		{"slice axis out of range", func() (*Projection, error) { return s.Slice(0, 2, 0) }},
		{"slice region out of range", func() (*Projection, error) { return s.Slice(2, 0, 0) }},
		{"slice of a one-axis region", func() (*Projection, error) { return one.Slice(0, 0, 0) }},
	} {
		if _, err := c.f(); err == nil {
			t.Errorf("%s: no error", c.name)
		}
	}
}

// TestProjectionFill checks every projection and slice of the testdata
// schemes by filling: the target bin a source bin maps to must be the bin
// the target binning itself finds for random points of that source bin.
func TestProjectionFill(t *testing.T) {
	rng := rand.New(rand.NewPCG(41, 42))
	for _, f := range []string{"scheme2d.yaml", "scheme3d.yaml"} {
		s := readTestdata(t, f)
		for r, reg := range s.Regions() {
			d := len(reg.Axes())
			var ps []*Projection
			var fixed [][2]int
			for mask := 1; mask < 1<<d-1; mask++ {
				var sum []int
				for k := 0; k < d; k++ {
					if mask&(1<<k) != 0 {
						sum = append(sum, k)
					}
				}
				if p, err := s.Project(r, sum...); err == nil {
					ps = append(ps, p)
					fixed = append(fixed, [2]int{-1, 0})
				}
			}
			for k, a := range reg.Axes() {
				if a.ByBin() || d < 2 {
					continue
				}
				for b := 0; b < a.Bins(0); b++ {
					p, err := s.Slice(r, k, b)
					if err != nil {
						t.Fatal(err)
					}
					ps = append(ps, p)
					fixed = append(fixed, [2]int{k, b})
				}
			}
			if len(ps) == 0 && d > 1 {
				t.Errorf("%s region %s: no projection", f, reg.Name())
			}
			for i, p := range ps {
				checkProjection(t, s, p, fixed[i], rng)
			}
		}
	}
}

func checkProjection(t *testing.T, s *Scheme, p *Projection, fixed [2]int, rng *rand.Rand) {
	t.Helper()
	lo, hi := s.Span(p.Region)
	filled := make([]bool, p.Target.Len())
	for g := 0; g < s.Len(); g++ {
		b := s.Bin(g)
		inSlice := g >= lo && g < hi && (fixed[0] < 0 || b.Index[fixed[0]] == fixed[1])
		if !inSlice {
			if p.Map[g] != -1 {
				t.Errorf("%s: bin %d (%s) maps to %d, want -1", p.Target.Label(0), g, s.Label(g), p.Map[g])
			}
			continue
		}
		for j := 0; j < 5; j++ {
			x := make([]float64, len(p.Axes))
			for i, k := range p.Axes {
				x[i] = b.Low[k] + rng.Float64()*(b.High[k]-b.Low[k])
			}
			if tg := p.Target.Locate(x); tg != p.Map[g] {
				t.Fatalf("bin %d (%s): the target binning puts %v in bin %d, the map says %d", g, s.Label(g), x, tg, p.Map[g])
			}
		}
		filled[p.Map[g]] = true
	}
	for tb, ok := range filled {
		if !ok {
			t.Errorf("target bin %d (%s) receives no source bin", tb, p.Target.Label(tb))
		}
	}
	// P v by Apply against a gonum dense product with the 0/1 matrix of
	// the map as the reference.
	nt, ns := p.Target.Len(), s.Len()
	dense := mat.NewDense(nt, ns, nil)
	for g, tt := range p.Map {
		if tt >= 0 {
			dense.Set(tt, g, 1)
		}
	}
	v := make([]float64, ns)
	for i := range v {
		v[i] = float64(rng.IntN(100))
	}
	var ref mat.VecDense
	ref.MulVec(dense, mat.NewVecDense(ns, v))
	got := p.Apply(make([]float64, nt), v)
	for i := range got {
		if got[i] != ref.AtVec(i) {
			t.Fatalf("Apply[%d] = %v, gonum dense product %v", i, got[i], ref.AtVec(i))
		}
	}
}
