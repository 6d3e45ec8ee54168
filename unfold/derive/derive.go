package derive

import (
	"fmt"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"

	"github.com/desmear/desmear/binning"
	"github.com/desmear/desmear/unfold"
)

// Kind is the kind of a derived quantity.
type Kind int

const (
	// Projection sums over the axes not kept.
	Projection Kind = iota
	// Density divides the projection by the widths of chosen axes and,
	// optionally, by the luminosity.
	Density
	// Shape normalises the projection to unit sum over the region or
	// over each slice.
	Shape
)

var kindNames = []string{Projection: "projection", Density: "density", Shape: "shape"}

// Kinds returns the kinds in order.
func Kinds() []Kind { return []Kind{Projection, Density, Shape} }

// String returns the kind's name: "projection", "density" or "shape".
func (k Kind) String() string {
	if k < 0 || int(k) >= len(kindNames) {
		return fmt.Sprintf("Kind(%d)", int(k))
	}
	return kindNames[k]
}

// MarshalText returns the kind's name; an unknown kind is an error.
func (k Kind) MarshalText() ([]byte, error) {
	if k < 0 || int(k) >= len(kindNames) {
		return nil, fmt.Errorf("derive: unknown kind %d", int(k))
	}
	return []byte(kindNames[k]), nil
}

// UnmarshalText sets the kind from its name.
func (k *Kind) UnmarshalText(text []byte) error {
	i := slices.Index(kindNames, string(text))
	if i < 0 {
		return fmt.Errorf("unknown kind %q (known: %s)", text, strings.Join(kindNames, ", "))
	}
	*k = Kind(i)
	return nil
}

// Spec describes a derived quantity.
type Spec struct {
	// Name names the quantity (letters, digits, '-', '_' and '.'); it
	// names its files.
	Name string
	// Region is the name of the truth region.
	Region string
	// Kind is the kind of the quantity.
	Kind Kind
	// Axes are the axes kept, in the region's order; none keeps every
	// axis.
	Axes []string
	// PerSlice lists kept axes along whose bins a shape is normalised
	// slice by slice; none normalises over the whole projection. Shapes
	// only.
	PerSlice []string
	// DivideByWidths lists the kept axes whose bin widths divide (at
	// least one for a density, none for a projection).
	DivideByWidths []string
	// Luminosity divides by the integrated luminosity (projections and
	// densities).
	Luminosity bool
}

// SpecError is a problem of a Spec: the field and what is wrong.
type SpecError struct {
	Field string // "name", "region", "kind", "axes", "per_slice", "divide_by_widths", "luminosity"
	Msg   string
}

func (e *SpecError) Error() string { return e.Field + ": " + e.Msg }

// Quantity is a derived quantity on a truth binning: its structure (the
// projection, the groups, the divisors), independent of the estimate.
type Quantity struct {
	spec Spec
	proj *binning.Projection
	// group of every target bin (all 0 without slices; nil unless a
	// shape) and the number of groups.
	group  []int
	groups int
	// div is the divisor of every target bin (product of the chosen
	// widths, times the luminosity).
	div []float64
}

// New returns the quantity spec on the truth binning s; lumi is the
// integrated luminosity, used only when spec.Luminosity is set (it must
// then be positive).
func New(s *binning.Scheme, spec Spec, lumi float64) (*Quantity, error) {
	if spec.Name == "" || strings.IndexFunc(spec.Name, func(r rune) bool {
		return !(r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' || r == '-' || r == '_' || r == '.')
	}) >= 0 || strings.HasPrefix(spec.Name, ".") {
		return nil, &SpecError{"name", fmt.Sprintf("%q is not a name: use letters, digits, '-', '_' and '.', not first", spec.Name)}
	}
	if spec.Kind < 0 || int(spec.Kind) >= len(kindNames) {
		return nil, &SpecError{"kind", fmt.Sprintf("unknown kind %d", int(spec.Kind))}
	}
	r := s.RegionIndex(spec.Region)
	if r < 0 {
		var names []string
		for _, reg := range s.Regions() {
			names = append(names, reg.Name())
		}
		return nil, &SpecError{"region", fmt.Sprintf("no truth region %q (the regions: %s)", spec.Region, strings.Join(names, ", "))}
	}
	reg := s.Regions()[r]
	var axisNames []string
	for _, a := range reg.Axes() {
		axisNames = append(axisNames, a.Name())
	}
	// indices of listed axes, checked against the region (and the kept
	// ones when keep is given).
	index := func(field string, list []string, among []string) ([]int, error) {
		var out []int
		for _, name := range list {
			k := slices.Index(axisNames, name)
			if k < 0 {
				return nil, &SpecError{field, fmt.Sprintf("region %q has no axis %q (its axes: %s)", reg.Name(), name, strings.Join(axisNames, ", "))}
			}
			if among != nil && !slices.Contains(among, name) {
				return nil, &SpecError{field, fmt.Sprintf("axis %q is summed over; list only kept axes (%s)", name, strings.Join(among, ", "))}
			}
			if slices.Contains(out, k) {
				return nil, &SpecError{field, fmt.Sprintf("axis %q listed twice", name)}
			}
			out = append(out, k)
		}
		return out, nil
	}
	keep, err := index("axes", spec.Axes, nil)
	if err != nil {
		return nil, err
	}
	if !slices.IsSorted(keep) {
		return nil, &SpecError{"axes", fmt.Sprintf("list the axes in the region's order (%s)", strings.Join(axisNames, ", "))}
	}
	if len(keep) == 0 {
		for k := range axisNames {
			keep = append(keep, k)
		}
	}
	var kept []string
	var sum []int
	for k, name := range axisNames {
		if slices.Contains(keep, k) {
			kept = append(kept, name)
		} else {
			sum = append(sum, k)
		}
	}
	slicesAt, err := index("per_slice", spec.PerSlice, kept)
	if err != nil {
		return nil, err
	}
	widths, err := index("divide_by_widths", spec.DivideByWidths, kept)
	if err != nil {
		return nil, err
	}
	switch {
	case spec.Kind != Shape && len(slicesAt) > 0:
		return nil, &SpecError{"per_slice", "only a shape is normalised per slice"}
	case spec.Kind == Projection && len(widths) > 0:
		return nil, &SpecError{"divide_by_widths", "a projection divides by no width; ask for a density"}
	case spec.Kind == Density && len(widths) == 0:
		return nil, &SpecError{"divide_by_widths", "a density needs the kept axes whose widths divide (leave out a count axis, such as a multiplicity)"}
	case spec.Kind == Shape && spec.Luminosity:
		return nil, &SpecError{"luminosity", "a normalised shape does not depend on the luminosity"}
	case spec.Luminosity && !(lumi > 0):
		return nil, &SpecError{"luminosity", "no integrated luminosity is given"}
	}
	if len(slicesAt) == len(keep) && len(keep) > 0 {
		return nil, &SpecError{"per_slice", "slicing along every kept axis leaves one bin per slice, each normalised to 1"}
	}
	proj, err := s.Project(r, sum...)
	if err != nil {
		return nil, &SpecError{"axes", strings.TrimPrefix(err.Error(), "binning: ")}
	}
	// Per-slice axes of the target region: an axis with edges by bin
	// of the axis before needs that axis among the slices too.
	taxes := proj.Target.Regions()[0].Axes()
	var tslice []int
	for _, k := range slicesAt {
		tslice = append(tslice, slices.Index(keep, k))
	}
	for _, j := range tslice {
		if taxes[j].ByBin() && !slices.Contains(tslice, j-1) {
			return nil, &SpecError{"per_slice", fmt.Sprintf("the bins of %q depend on the bin of %q: list %q as well", taxes[j].Name(), taxes[j-1].Name(), taxes[j-1].Name())}
		}
	}
	q := &Quantity{spec: spec, proj: proj}
	q.spec.Axes = kept
	m := proj.Target.Len()
	q.div = make([]float64, m)
	if spec.Kind == Shape {
		q.group = make([]int, m)
	}
	ids := map[string]int{}
	var tw []int
	for _, k := range widths {
		tw = append(tw, slices.Index(keep, k))
	}
	for t := range m {
		b := proj.Target.Bin(t)
		d := 1.0
		for _, j := range tw {
			d *= b.High[j] - b.Low[j]
		}
		if spec.Luminosity {
			d *= lumi
		}
		q.div[t] = d
		if q.group != nil {
			key := ""
			for _, j := range tslice {
				key += fmt.Sprintf("%d,", b.Index[j])
			}
			id, ok := ids[key]
			if !ok {
				id = len(ids)
				ids[key] = id
			}
			q.group[t] = id
		}
	}
	q.groups = max(len(ids), 1)
	return q, nil
}

// Spec returns the specification, with Axes filled with the kept axes.
func (q *Quantity) Spec() Spec { return q.spec }

// Target returns the binning of the quantity: one region with the kept
// axes and no flow bins.
func (q *Quantity) Target() *binning.Scheme { return q.proj.Target }

// Len returns the number of bins of the quantity.
func (q *Quantity) Len() int { return len(q.div) }

// Divisor returns the divisor of bin t: the product of the chosen widths
// and the luminosity (1 for a projection).
func (q *Quantity) Divisor(t int) float64 { return q.div[t] }

// Groups returns the number of normalisation groups of a shape (1 per
// slice; 1 over the whole projection) and 0 for the other kinds.
func (q *Quantity) Groups() int {
	if q.group == nil {
		return 0
	}
	return q.groups
}

// Group returns the normalisation group of bin t of a shape.
func (q *Quantity) Group(t int) int { return q.group[t] }

// Singular reports whether the quantity's covariance is singular by
// construction (a shape).
func (q *Quantity) Singular() bool { return q.spec.Kind == Shape }

// project writes the projection P mu to dst.
func (q *Quantity) project(dst, mu []float64) { q.proj.Apply(dst, mu) }

// sums returns the sum of s over each group.
func (q *Quantity) sums(s []float64) []float64 {
	sum := make([]float64, q.groups)
	for t, x := range s {
		sum[q.group[t]] += x
	}
	return sum
}

// Value writes y = f(mu) to dst (length Len) and returns dst; mu has one
// entry per global truth bin. A shape group whose sum is not positive
// gives 0 in its bins. dst must not alias mu.
func (q *Quantity) Value(dst, mu []float64) []float64 {
	q.checkLen(dst, mu)
	q.project(dst, mu)
	if q.group != nil {
		sum := q.sums(dst)
		for t := range dst {
			if S := sum[q.group[t]]; S > 0 {
				dst[t] /= S
			} else {
				dst[t] = 0
			}
		}
	}
	for t := range dst {
		dst[t] /= q.div[t]
	}
	return dst
}

func (q *Quantity) checkLen(dst, mu []float64) {
	if len(dst) != q.Len() || len(mu) != len(q.proj.Map) {
		panic(fmt.Sprintf("derive: len(dst)=%d, len(mu)=%d; want %d and %d", len(dst), len(mu), q.Len(), len(q.proj.Map)))
	}
}

// Matrix is a sparse matrix in compressed-row form (unfold.RowMatrix),
// so that a Quantity is an unfold.Derived whose covariance every source
// of uncertainty propagates by itself.
type Matrix = unfold.RowMatrix

var _ unfold.Derived = (*Quantity)(nil)

// Jacobian returns D = ∂y/∂μ at mu (Len rows, one column per global
// truth bin): W⁻¹ P for a projection or density, W⁻¹ J P for a shape
// (a row of a shape holds every bin of its group; a group of sum 0 gives
// zero rows).
func (q *Quantity) Jacobian(mu []float64) *Matrix {
	m := q.Len()
	s := make([]float64, m)
	q.checkLen(s, mu)
	q.project(s, mu)
	members := make([][]int, m) // source bins of each target bin
	for g, t := range q.proj.Map {
		if t >= 0 {
			members[t] = append(members[t], g)
		}
	}
	d := &Matrix{Rows: m, Cols: len(mu), Ptr: make([]int, 1, m+1)}
	if q.group == nil {
		for t := range m {
			for _, g := range members[t] {
				d.Col = append(d.Col, g)
				d.Val = append(d.Val, 1/q.div[t])
			}
			d.Ptr = append(d.Ptr, len(d.Col))
		}
		return d
	}
	sum := q.sums(s)
	for t := range m {
		k := q.group[t]
		S := sum[k]
		if S > 0 {
			// Row t: (δ_tu − y_t)/S for every u of group k, on each
			// source bin of u.
			y := s[t] / S
			var cols []int
			for u := range m {
				if q.group[u] == k {
					cols = append(cols, members[u]...)
				}
			}
			slices.Sort(cols)
			for _, g := range cols {
				v := -y / S
				if q.proj.Map[g] == t {
					v += 1 / S
				}
				d.Col = append(d.Col, g)
				d.Val = append(d.Val, v/q.div[t])
			}
		}
		d.Ptr = append(d.Ptr, len(d.Col))
	}
	return d
}

// Covariance writes Cov_y = D cov Dᵀ, D the Jacobian at mu, to dst (nil
// allocates a Len×Len matrix) and returns it; cov is the covariance of
// mu over the global truth bins. It costs one pass over the pairs of
// the region's in-range bins and O(Len²) after that.
func (q *Quantity) Covariance(dst *mat.SymDense, mu []float64, cov mat.Symmetric) *mat.SymDense {
	m := q.Len()
	s := make([]float64, m)
	q.checkLen(s, mu)
	if cov.SymmetricDim() != len(mu) {
		panic(fmt.Sprintf("derive: covariance of dimension %d for %d truth bins", cov.SymmetricDim(), len(mu)))
	}
	if dst == nil {
		dst = mat.NewSymDense(m, nil)
	} else if dst.SymmetricDim() != m {
		panic(fmt.Sprintf("derive: destination of dimension %d for %d derived bins", dst.SymmetricDim(), m))
	}
	q.project(s, mu)
	// C = P cov Pᵀ.
	var src []int
	for g, t := range q.proj.Map {
		if t >= 0 {
			src = append(src, g)
		}
	}
	c := mat.NewDense(m, m, nil)
	for _, g := range src {
		tg := q.proj.Map[g]
		for _, h := range src {
			th := q.proj.Map[h]
			c.Set(tg, th, c.At(tg, th)+cov.At(g, h))
		}
	}
	if q.group != nil {
		// C ← J C Jᵀ with J_tu = (δ_tu − y_t [k(u) = k(t)]) / S_k(t).
		sum := q.sums(s)
		y := make([]float64, m)
		inv := make([]float64, m)
		for t := range m {
			if S := sum[q.group[t]]; S > 0 {
				y[t], inv[t] = s[t]/S, 1/S
			}
		}
		// rows: M = J C.
		gs := mat.NewDense(q.groups, m, nil)
		for t := range m {
			k := q.group[t]
			for u := range m {
				gs.Set(k, u, gs.At(k, u)+c.At(t, u))
			}
		}
		for t := range m {
			k := q.group[t]
			for u := range m {
				c.Set(t, u, (c.At(t, u)-y[t]*gs.At(k, u))*inv[t])
			}
		}
		// columns: M Jᵀ.
		hs := mat.NewDense(m, q.groups, nil)
		for t := range m {
			for u := range m {
				k := q.group[u]
				hs.Set(t, k, hs.At(t, k)+c.At(t, u))
			}
		}
		for t := range m {
			for u := range m {
				c.Set(t, u, (c.At(t, u)-y[u]*hs.At(t, q.group[u]))*inv[u])
			}
		}
	}
	for t := range m {
		for u := t; u < m; u++ {
			// Symmetrise the rounding of the two one-sided products.
			v := 0.5 * (c.At(t, u) + c.At(u, t))
			dst.SetSym(t, u, v/(q.div[t]*q.div[u]))
		}
	}
	return dst
}
