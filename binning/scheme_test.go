package binning

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
)

func readTestdata(tb testing.TB, name string) *Scheme {
	tb.Helper()
	s, err := ReadFile("../testdata/" + name)
	if err != nil {
		tb.Fatal(err)
	}
	return s
}

var inf = math.Inf(1)

// TestFlattening2D checks the global index of testdata/scheme2d.yaml
// against the order written out by hand from the rules in doc.go: in-range
// bins first (regions in order, row-major, last axis fastest; each rapidity
// slice with its own pt edges), then the flow bins (pt underflow and
// overflow per y slice, then the y overflow with pt collapsed). A value on
// an edge belongs to the bin above it (common practice for histograms).
func TestFlattening2D(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	want := []string{
		"central y[0,0.5) pt[20,30)", "central y[0,0.5) pt[30,45)", "central y[0,0.5) pt[45,70)", "central y[0,0.5) pt[70,110)",
		"central y[0.5,1) pt[20,30)", "central y[0.5,1) pt[30,50)", "central y[0.5,1) pt[50,90)",
		"central y[1,1.5) pt[20,40)", "central y[1,1.5) pt[40,80)",
		"forward y[1.5,2) pt[20,40)", "forward y[1.5,2) pt[40,100)", "forward y[2,2.5) pt[20,40)", "forward y[2,2.5) pt[40,100)",
		"central y[0,0.5) pt(-inf,20)", "central y[0,0.5) pt[110,inf)",
		"central y[0.5,1) pt(-inf,20)", "central y[0.5,1) pt[90,inf)",
		"central y[1,1.5) pt(-inf,20)", "central y[1,1.5) pt[80,inf)",
		"central y[1.5,inf) pt(any)",
	}
	if s.Len() != len(want) || s.InRange() != 13 {
		t.Fatalf("Len=%d InRange=%d, want %d and 13", s.Len(), s.InRange(), len(want))
	}
	for g, w := range want {
		if got := s.Label(g); got != w {
			t.Errorf("Label(%d) = %q, want %q", g, got, w)
		}
	}
	if got := s.AxisNames(); !slices.Equal(got, []string{"y", "pt"}) {
		t.Errorf("AxisNames = %v", got)
	}
	// Volumes: product of widths (bin 5 is 0.5 x 20), +Inf for flows.
	if v := s.Bin(5).Volume; v != 10 {
		t.Errorf("Bin(5).Volume = %v, want 10", v)
	}
	if v := s.Bin(13).Volume; !math.IsInf(v, 1) {
		t.Errorf("flow Bin(13).Volume = %v, want +Inf", v)
	}
}

// TestLocateEdgeCases checks hand-derived answers on the testdata schemes:
// values on an edge go to the bin above, the last edge to the overflow,
// ±Inf to the flow bins when on, NaN outside, in-range bins of a later
// region before flow bins of an earlier one.
func TestLocateEdgeCases(t *testing.T) {
	s2 := readTestdata(t, "scheme2d.yaml")
	s3 := readTestdata(t, "scheme3d.yaml")
	nan := math.NaN()
	cases := []struct {
		s    *Scheme
		x    []float64
		want string // label, or "" for Outside
	}{
		{s2, []float64{0, 20}, "central y[0,0.5) pt[20,30)"},
		{s2, []float64{0.5, 30}, "central y[0.5,1) pt[30,50)"},       // on edges: the bin above
		{s2, []float64{0.25, 110}, "central y[0,0.5) pt[110,inf)"},   // last edge of a slice: overflow
		{s2, []float64{0.25, 109.99}, "central y[0,0.5) pt[70,110)"}, // just below it
		{s2, []float64{0.25, inf}, "central y[0,0.5) pt[110,inf)"},
		{s2, []float64{0.25, -inf}, "central y[0,0.5) pt(-inf,20)"},
		{s2, []float64{1.2, 19.999}, "central y[1,1.5) pt(-inf,20)"},
		{s2, []float64{1.2, 35}, "central y[1,1.5) pt[20,40)"},
		{s2, []float64{1.5, 35}, "forward y[1.5,2) pt[20,40)"}, // central overflow covers it, in-range wins
		{s2, []float64{2.5, 35}, "central y[1.5,inf) pt(any)"}, // last edge of forward (no flows there)
		{s2, []float64{1.7, 1000}, "central y[1.5,inf) pt(any)"},
		{s2, []float64{inf, -inf}, "central y[1.5,inf) pt(any)"},
		{s2, []float64{-0.1, 30}, ""}, // y underflow is off
		{s2, []float64{-inf, 30}, ""}, // likewise
		{s2, []float64{nan, 30}, ""},  // NaN
		{s2, []float64{0.2, nan}, ""}, // NaN
		{s3, []float64{0.5, 5, 85}, "signal y[0,1) pt[0,10) mass[80,90)"},
		{s3, []float64{1, 20, 100}, "signal y[1,2) pt[20,50) mass[100,inf)"},
		{s3, []float64{0.5, 5, 70}, "sideband mass[60,80) y[0,2)"}, // signal's mass underflow covers it
		{s3, []float64{0.5, 5, 30}, "signal y[0,1) pt[0,10) mass(-inf,80)"},
		{s3, []float64{0.5, 50, 95}, "signal y[0,1) pt[50,inf) mass[90,100)"},
		{s3, []float64{2, 1e9, 95}, "signal y[2,inf) pt(any) mass[90,100)"},
		{s3, []float64{4, 0, 50}, "signal y[2,inf) pt(any) mass(-inf,80)"}, // before the sideband's y overflow
		{s3, []float64{-1, 0, 50}, "sideband mass[40,60) y(-inf,0)"},
		{s3, []float64{-1, 0, 30}, ""},
		{s3, []float64{0.5, -1, 85}, ""}, // pt underflow is off
	}
	for _, c := range cases {
		g := c.s.Locate(c.x)
		got := ""
		if g != Outside {
			got = c.s.Label(g)
		}
		if got != c.want {
			t.Errorf("Locate(%v) = %d %q, want %q", c.x, g, got, c.want)
		}
	}
}

// representative returns points inside bin b: its centre, its lower edges,
// and for flow bins far and infinite values on the open sides.
func representative(s *Scheme, b refBin) [][]float64 {
	reg := s.regions[b.region]
	var opts [][]float64
	for k := range reg.axes {
		lo, hi := b.low[k], b.hig[k]
		var o []float64
		switch {
		case math.IsInf(lo, -1) && math.IsInf(hi, 1):
			o = []float64{0, 1.75, -1e9, 1e9, -inf, inf}
		case math.IsInf(lo, -1):
			o = []float64{hi - 1, -inf, math.Nextafter(hi, -inf)}
		case math.IsInf(hi, 1):
			o = []float64{lo, lo + 1, inf}
		default:
			o = []float64{0.5 * (lo + hi), lo, math.Nextafter(hi, -inf)}
		}
		opts = append(opts, o)
	}
	// All combinations, other coordinates of the scheme at 0.
	var out [][]float64
	var rec func(k int, x []float64)
	rec = func(k int, x []float64) {
		if k == len(reg.axes) {
			out = append(out, slices.Clone(x))
			return
		}
		j := s.AxisIndex(reg.axes[k].name)
		for _, v := range opts[k] {
			x[j] = v
			rec(k+1, x)
		}
	}
	rec(0, make([]float64, len(s.names)))
	return out
}

// checkScheme compares every global bin and many points with the naive
// reference implementation in reference_test.go.
// With allReached, every bin must be reached by one of its representative
// points (false where random regions overlap and shadow bins).
func checkScheme(t *testing.T, s *Scheme, name string, allReached bool) {
	t.Helper()
	ref := refFlatten(s)
	if len(ref) != s.Len() {
		t.Fatalf("%s: Len = %d, reference has %d bins", name, s.Len(), len(ref))
	}
	nIn := 0
	for _, b := range ref {
		if !b.flow {
			nIn++
		}
	}
	if s.InRange() != nIn {
		t.Fatalf("%s: InRange = %d, want %d", name, s.InRange(), nIn)
	}
	reached := make([]bool, len(ref))
	for g, rb := range ref {
		b := s.Bin(g)
		if b.Region != rb.region || b.Flow != rb.flow || !slices.Equal(b.Index, rb.idx) ||
			!slices.Equal(b.Low, rb.low) || !slices.Equal(b.High, rb.hig) {
			t.Fatalf("%s: Bin(%d) = %+v, reference %+v", name, g, b, rb)
		}
		if got := s.Global(b.Region, b.Index...); got != g {
			t.Errorf("%s: Global(%d, %v) = %d, want %d", name, b.Region, b.Index, got, g)
		}
		for _, x := range representative(s, rb) {
			want := refLocate(s, ref, x)
			got := s.Locate(x)
			if got != want {
				t.Fatalf("%s: Locate(%v) = %d, reference %d (bin %d is %s)", name, x, got, want, g, s.Label(g))
			}
			if got == g {
				reached[g] = true
			}
		}
		for k := range b.Index {
			p, n := s.Neighbours(g, k)
			wp, wn := refNeighbour(s, ref, g, k, -1), refNeighbour(s, ref, g, k, +1)
			if p != wp || n != wn {
				t.Errorf("%s: Neighbours(%d, %d) = %d, %d; reference %d, %d", name, g, k, p, n, wp, wn)
			}
		}
	}
	for g, ok := range reached {
		if !ok && allReached {
			t.Errorf("%s: no representative point of bin %d (%s) is located there", name, g, s.Label(g))
		}
	}
}

// TestRoundTripTestdata runs locate and reverse lookup on every bin of the
// testdata schemes, flows included.
func TestRoundTripTestdata(t *testing.T) {
	for _, f := range []string{"scheme2d.yaml", "scheme3d.yaml"} {
		checkScheme(t, readTestdata(t, f), f, true)
	}
}

// randomEdges returns n+1 increasing edges with irregular widths,
// sometimes clustered, starting near lo.
func randomEdges(rng *rand.Rand, n int, lo float64) []float64 {
	e := make([]float64, n+1)
	e[0] = lo + math.Round(rng.Float64()*4)/4
	for i := 1; i <= n; i++ {
		w := math.Round(rng.ExpFloat64()*8)/8 + 0.125
		if rng.IntN(5) == 0 {
			w = 1.0 / 64
		}
		e[i] = e[i-1] + w
	}
	return e
}

// randomScheme builds a scheme of 1-3 regions of 1-3 axes drawn from
// the names a, b, c in random order, with random flows and random
// edges-by-bin axes.
func randomScheme(rng *rand.Rand) *Scheme {
	names := []string{"a", "b", "c"}
	nr := 1 + rng.IntN(3)
	regs := make([]*Region, nr)
	for r := range regs {
		d := 1 + rng.IntN(3)
		perm := rng.Perm(3)[:d]
		axes := make([]*Axis, d)
		for k := range axes {
			n := 1 + rng.IntN(5)
			u, o := rng.IntN(2) == 0, rng.IntN(2) == 0
			var err error
			if k > 0 && !axes[k-1].ByBin() && rng.IntN(2) == 0 {
				by := make([][]float64, axes[k-1].Bins(0))
				for i := range by {
					by[i] = randomEdges(rng, 1+rng.IntN(4), -1)
				}
				axes[k], err = NewAxisByBin(names[perm[k]], "", by, u, o)
			} else {
				axes[k], err = NewAxis(names[perm[k]], "", randomEdges(rng, n, -1), u, o)
			}
			if err != nil {
				panic(err)
			}
		}
		reg, err := NewRegion(fmt.Sprintf("r%d", r), axes...)
		if err != nil {
			panic(err)
		}
		regs[r] = reg
	}
	s, err := NewScheme(regs...)
	if err != nil {
		panic(err)
	}
	return s
}

// TestRandomSchemes compares random schemes, overlapping regions and all,
// with the reference implementation on every bin.
func TestRandomSchemes(t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 12))
	for i := 0; i < 200; i++ {
		checkScheme(t, randomScheme(rng), fmt.Sprintf("random scheme %d", i), false)
	}
}

// TestLocateProperty: for random points, Locate agrees with the reference
// and the reverse lookup of the bin found contains the point.
func TestLocateProperty(t *testing.T) {
	rng := rand.New(rand.NewPCG(21, 22))
	for i := 0; i < 100; i++ {
		s := randomScheme(rng)
		ref := refFlatten(s)
		var edges []float64
		for _, b := range ref {
			for k := range b.low {
				edges = append(edges, b.low[k], b.hig[k])
			}
		}
		x := make([]float64, len(s.AxisNames()))
		for j := 0; j < 500; j++ {
			for k := range x {
				switch rng.IntN(10) {
				case 0:
					x[k] = edges[rng.IntN(len(edges))] // exactly on an edge (or ±Inf)
				case 1:
					x[k] = []float64{-inf, inf, math.NaN()}[rng.IntN(3)]
				default:
					x[k] = rng.Float64()*14 - 3
				}
			}
			g := s.Locate(x)
			if want := refLocate(s, ref, x); g != want {
				t.Fatalf("scheme %d: Locate(%v) = %d, reference %d", i, x, g, want)
			}
			if g == Outside {
				continue
			}
			b := s.Bin(g)
			for k, name := range b.Axes {
				v := x[s.AxisIndex(name)]
				in := b.Low[k] <= v && (v < b.High[k] || math.IsInf(v, 1) && math.IsInf(b.High[k], 1))
				if !in {
					t.Fatalf("scheme %d: point %v located in bin %d (%s), whose %s edges [%v,%v) do not contain %v", i, x, g, s.Label(g), name, b.Low[k], b.High[k], v)
				}
			}
		}
	}
}

// TestFinder compares the bucket search with a linear scan on irregular
// edges, at random values and exactly on every edge.
func TestFinder(t *testing.T) {
	rng := rand.New(rand.NewPCG(31, 32))
	linear := func(e []float64, x float64) int {
		i := -1
		for i+1 < len(e) && e[i+1] <= x {
			i++
		}
		return i
	}
	for i := 0; i < 300; i++ {
		e := randomEdges(rng, 1+rng.IntN(60), -5)
		if i%3 == 0 {
			e = uniformEdges(1+rng.IntN(100), -rng.Float64(), rng.Float64()+0.1)
		}
		f := newFinder(e)
		try := func(x float64) {
			if got, want := f.find(x), linear(e, x); got != want {
				t.Fatalf("edges %v: find(%v) = %d, want %d", e, x, got, want)
			}
		}
		for _, v := range e {
			try(v)
			try(math.Nextafter(v, inf))
			try(math.Nextafter(v, -inf))
		}
		try(inf)
		try(-inf)
		for j := 0; j < 1000; j++ {
			try(e[0] - 1 + rng.Float64()*(e[len(e)-1]-e[0]+2))
		}
	}
}

// TestNeighbours2D checks the neighbour rule across the edges-by-bin pt
// axis of testdata/scheme2d.yaml by hand.
func TestNeighbours2D(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	cases := []struct{ g, axis, prev, next int }{
		{1, 0, -1, 5},  // pt[30,45), centre 37.5: in pt[30,50) of slice 1
		{5, 0, 1, 8},   // pt[30,50), centre 40: pt[30,45) of slice 0, pt[40,80) of slice 2
		{3, 0, -1, -1}, // pt[70,110), centre 90: on the last edge of slice 1, outside its bins
		{4, 1, -1, 5},  // along pt: the underflow is not a neighbour
		{6, 0, 3, 8},   // centre 70: pt[70,110) of slice 0 (not symmetric: bin 3 has no next)
		{8, 1, 7, -1},
		{8, 0, 6, -1}, // no y slice 3 in the central region; forward is another region
		{9, 0, -1, 11},
		{9, 1, -1, 10},
		{13, 0, -1, -1}, // flow bins have no neighbours
		{19, 1, -1, -1},
	}
	for _, c := range cases {
		p, n := s.Neighbours(c.g, c.axis)
		if p != c.prev || n != c.next {
			t.Errorf("Neighbours(%d %s, %d) = %d, %d, want %d, %d", c.g, s.Label(c.g), c.axis, p, n, c.prev, c.next)
		}
	}
}

// TestConstructionErrors checks that bad axes, regions and schemes are
// rejected with an error.
func TestConstructionErrors(t *testing.T) {
	nan := math.NaN()
	bad := [][]float64{nil, {1}, {1, 1}, {2, 1}, {0, nan}, {0, inf}, {-inf, 0}}
	for _, e := range bad {
		if _, err := NewAxis("x", "", e, false, false); err == nil {
			t.Errorf("NewAxis(%v) gave no error", e)
		}
		if _, err := NewAxisByBin("x", "", [][]float64{{0, 1}, e}, false, false); err == nil {
			t.Errorf("NewAxisByBin(%v) gave no error", e)
		}
	}
	if _, err := NewAxis("", "", []float64{0, 1}, false, false); err == nil {
		t.Error("NewAxis without name gave no error")
	}
	x, _ := NewAxis("x", "", []float64{0, 1, 2}, false, false)
	x2, _ := NewAxis("x", "GeV", []float64{0, 1}, false, false)
	y2, _ := NewAxisByBin("y", "", [][]float64{{0, 1}, {0, 2}}, false, false)
	y3, _ := NewAxisByBin("y", "", [][]float64{{0, 1}, {0, 2}, {0, 3}}, false, false)
	z2, _ := NewAxisByBin("z", "", [][]float64{{0, 1}, {0, 2}}, false, false)
	for _, c := range []struct {
		name string
		axes []*Axis
	}{
		{"no axes", nil},
		{"duplicate axis", []*Axis{x, x}},
		{"by-bin first", []*Axis{y2}},
		{"by-bin length", []*Axis{x, y3}},
		{"by-bin chain", []*Axis{x, y2, z2}},
		{"nil axis", []*Axis{x, nil}},
		{"zero axis", []*Axis{x, new(Axis)}},
	} {
		if _, err := NewRegion("r", c.axes...); err == nil {
			t.Errorf("NewRegion %s gave no error", c.name)
		}
	}
	big, _ := NewAxis("big", "", uniformEdges(1000, 0, 1), true, true)
	big2, _ := NewAxis("big2", "", uniformEdges(1000, 0, 1), false, false)
	big3, _ := NewAxis("big3", "", uniformEdges(1000, 0, 1), false, false)
	if _, err := NewRegion("huge", big, big2, big3); err == nil {
		t.Error("a region of 1e9 bins gave no error")
	}
	r1, _ := NewRegion("r", x)
	r2, _ := NewRegion("s", x2)
	if _, err := NewScheme(r1, r1); err == nil {
		t.Error("duplicate region names gave no error")
	}
	if _, err := NewScheme(r1, r2); err == nil {
		t.Error("different units for one axis name gave no error")
	}
	if _, err := NewScheme(); err == nil {
		t.Error("empty scheme gave no error")
	}
}

func TestLocateNoAlloc(t *testing.T) {
	s := readTestdata(t, "scheme3d.yaml")
	x := []float64{0.5, 60, 30}
	if n := testing.AllocsPerRun(100, func() { s.Locate(x) }); n != 0 {
		t.Errorf("Locate allocates %v times", n)
	}
}

func TestRegionOf(t *testing.T) {
	s := readTestdata(t, "scheme3d.yaml")
	for g := 0; g < s.Len(); g++ {
		b := s.Bin(g)
		if s.RegionOf(g) != b.Region || s.NumAxes(g) != len(b.Axes) {
			t.Errorf("bin %d: RegionOf %d NumAxes %d, want %d and %d", g, s.RegionOf(g), s.NumAxes(g), b.Region, len(b.Axes))
		}
	}
}

// TestConstructionErrorsMore covers the remaining refusals of NewAxisByBin,
// NewRegion and NewScheme, each checked on its own.
func TestConstructionErrorsMore(t *testing.T) {
	if _, err := NewAxisByBin("", "", [][]float64{{0, 1}}, false, false); err == nil {
		t.Error("NewAxisByBin without name gave no error")
	}
	if _, err := NewAxisByBin("x", "", nil, false, false); err == nil {
		t.Error("NewAxisByBin without edge lists gave no error")
	}
	x, _ := NewAxis("x", "", []float64{0, 1}, false, false)
	if _, err := NewRegion("", x); err == nil {
		t.Error("NewRegion without name gave no error")
	}
	axes := make([]*Axis, MaxAxes+1)
	for k := range axes {
		axes[k], _ = NewAxis(fmt.Sprint("a", k), "", []float64{0, 1}, false, false)
	}
	if _, err := NewRegion("r", axes[:MaxAxes]...); err != nil {
		t.Errorf("NewRegion with %d axes: %v", MaxAxes, err)
	}
	if _, err := NewRegion("r", axes...); err == nil {
		t.Errorf("NewRegion with %d axes gave no error", MaxAxes+1)
	}
	r, _ := NewRegion("r", x)
	if _, err := NewScheme(r, nil); err == nil {
		t.Error("NewScheme with a nil region gave no error")
	}
	// Three regions of 2^26 bins: each fits in MaxBins, together they do not.
	e := uniformEdges(1<<13, 0, 1)
	u, _ := NewAxis("u", "", e, false, false)
	v, _ := NewAxis("v", "", e, false, false)
	var regs []*Region
	for _, name := range []string{"a", "b", "c"} {
		reg, err := NewRegion(name, u, v)
		if err != nil {
			t.Fatal(err)
		}
		regs = append(regs, reg)
	}
	if _, err := NewScheme(regs[:2]...); err != nil {
		t.Errorf("a scheme of 2^27 bins: %v", err)
	}
	if _, err := NewScheme(regs...); err == nil {
		t.Error("a scheme of 3·2^26 bins gave no error")
	}
}

// TestGlobalNoSuchBin checks that Global returns -1 for bin numbers that
// name no bin of testdata/scheme2d.yaml.
func TestGlobalNoSuchBin(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	for _, c := range []struct {
		name string
		r    int
		idx  []int
	}{
		{"too few bin numbers", 0, []int{0}},
		{"too many bin numbers", 0, []int{0, 0, 0}},
		{"plain axis bin out of range", 0, []int{3, 0}},
		{"nested bin past its slice", 0, []int{2, 2}}, // y slice 2 has 2 pt bins
		{"underflow switched off", 0, []int{UnderflowBin, AnyBin}},
		{"overflow switched off", 1, []int{0, OverflowBin}},
		{"nested flow bin past its slice", 0, []int{1, 3}},
		{"AnyBin under an in-range bin", 0, []int{0, AnyBin}},
		{"a bin number under a flow of the axis before", 0, []int{OverflowBin, 0}},
		{"AnyBin on a plain axis", 1, []int{AnyBin, 0}},
		{"negative bin number", 0, []int{-4, 0}},
	} {
		if g := s.Global(c.r, c.idx...); g != -1 {
			t.Errorf("%s: Global(%d, %v) = %d (%s), want -1", c.name, c.r, c.idx, g, s.Label(g))
		}
	}
	// The valid flow bins next to those cases.
	if g := s.Global(0, OverflowBin, AnyBin); g != 19 {
		t.Errorf("Global(0, overflow, any) = %d, want 19", g)
	}
	if g := s.Global(0, 2, OverflowBin); g != 18 {
		t.Errorf("Global(0, 2, overflow) = %d, want 18", g)
	}
}

// TestProgrammerErrorsPanic checks that calls with wrong lengths or out-of-range
// arguments panic, as doc.go says.
func TestProgrammerErrorsPanic(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	p, err := s.Project(1, 0)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name string
		f    func()
	}{
		{"Locate with one coordinate", func() { s.Locate([]float64{1}) }},
		{"Bin(-1)", func() { s.Bin(-1) }},
		{"Bin(Len())", func() { s.Bin(s.Len()) }},
		{"Label(Len())", func() { s.Label(s.Len()) }},
		{"Neighbours along axis 2 of a 2-axis region", func() { s.Neighbours(0, 2) }},
		{"Neighbours along axis -1", func() { s.Neighbours(0, -1) }},
		{"Apply with a short src", func() { p.Apply(make([]float64, p.Target.Len()), make([]float64, s.Len()-1)) }},
		{"Apply with a long dst", func() { p.Apply(make([]float64, p.Target.Len()+1), make([]float64, s.Len())) }},
	} {
		func() {
			defer func() {
				if recover() == nil {
					t.Errorf("%s did not panic", c.name)
				}
			}()
			c.f()
		}()
	}
}

// TestLookups checks the name lookups and the region shape of
// testdata/scheme2d.yaml, whose central region has pt edges by y bin.
func TestLookups(t *testing.T) {
	s := readTestdata(t, "scheme2d.yaml")
	if s.RegionIndex("forward") != 1 || s.RegionIndex("central") != 0 || s.RegionIndex("backward") != -1 {
		t.Errorf("RegionIndex forward, central, backward = %d, %d, %d; want 1, 0, -1", s.RegionIndex("forward"), s.RegionIndex("central"), s.RegionIndex("backward"))
	}
	if s.AxisIndex("pt") != 1 || s.AxisIndex("mass") != -1 {
		t.Errorf("AxisIndex pt, mass = %d, %d; want 1, -1", s.AxisIndex("pt"), s.AxisIndex("mass"))
	}
	if u, ok := s.AxisUnit("pt"); u != "GeV" || !ok {
		t.Errorf("AxisUnit(pt) = %q, %v; want GeV, true", u, ok)
	}
	if u, ok := s.AxisUnit("mass"); u != "" || ok {
		t.Errorf("AxisUnit(mass) = %q, %v; want \"\", false", u, ok)
	}
	regs := s.Regions()
	if regs[0].Rectangular() || !regs[1].Rectangular() {
		t.Errorf("Rectangular central, forward = %v, %v; want false, true", regs[0].Rectangular(), regs[1].Rectangular())
	}
	if regs[0].Len() != 9 || regs[0].Flows() != 7 || regs[1].Len() != 4 || regs[1].Flows() != 0 {
		t.Errorf("central Len %d Flows %d, forward Len %d Flows %d; want 9, 7, 4, 0", regs[0].Len(), regs[0].Flows(), regs[1].Len(), regs[1].Flows())
	}
}

// EachLabel gives every bin's Label, in order, on the testdata schemes,
// random ones (nested axes, flows, several regions) and edges -0 and 0,
// which compare equal but print apart (strconv 'g' formatting keeps the
// sign of zero: common practice of IEEE 754 printing).
func TestEachLabel(t *testing.T) {
	a, err := NewAxis("x", "", []float64{-1, math.Copysign(0, -1)}, true, false)
	if err != nil {
		t.Fatal(err)
	}
	b, err := NewAxis("x", "", []float64{0, 1}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	ra, err := NewRegion("neg", a)
	if err != nil {
		t.Fatal(err)
	}
	rb, err := NewRegion("pos", b)
	if err != nil {
		t.Fatal(err)
	}
	zeros, err := NewScheme(ra, rb)
	if err != nil {
		t.Fatal(err)
	}
	schemes := []*Scheme{zeros, readTestdata(t, "scheme2d.yaml"), readTestdata(t, "scheme3d.yaml")}
	rng := rand.New(rand.NewPCG(31, 32))
	for range 50 {
		schemes = append(schemes, randomScheme(rng))
	}
	for i, s := range schemes {
		next := 0
		s.EachLabel(func(g int, label []byte) {
			if g != next {
				t.Fatalf("scheme %d: bin %d after %d", i, g, next-1)
			}
			next++
			if want := s.Label(g); string(label) != want {
				t.Errorf("scheme %d, bin %d: label %q, want %q", i, g, label, want)
			}
		})
		if next != s.Len() {
			t.Errorf("scheme %d: %d labels for %d bins", i, next, s.Len())
		}
	}
	if got, want := zeros.Label(0), "neg x[-1,-0)"; got != want {
		t.Errorf("Label(0) = %q, want %q", got, want)
	}
}
