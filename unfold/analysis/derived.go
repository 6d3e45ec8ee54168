package analysis

import (
	"fmt"
	"slices"
	"strings"

	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/derive"
	"github.com/desmear/desmear/unfold/result"
)

// derivedFields maps the fields of a derive.SpecError to the keys of an
// entry of output.derived.
var derivedFields = map[string]string{
	"name": "name", "region": "region", "kind": "kind", "axes": "axes",
	"per_slice": "per_slice", "divide_by_widths": "divide_by_widths", "luminosity": "luminosity",
}

// derived checks the derived quantities of output.derived against the
// truth binning and the luminosity, and keeps them in a.Output.Derived.
func (c *checker) derived(a *Analysis, docs []derivedDoc) {
	if len(docs) > 0 && !slices.Contains(a.Output.Formats, result.DerivedFormat) {
		c.errf(c.line("output", "formats"), "output.formats", "output.derived lists quantities but the formats leave out %q, which writes them: add it", result.DerivedFormat)
	}
	seen := map[string]int{}
	for i, d := range docs {
		at := func(key string) (int, string) {
			return c.line("output", "derived", i, key), fmt.Sprintf("output.derived[%d].%s", i, key)
		}
		name := strings.TrimSpace(d.Name)
		if name == "" {
			c.errf(c.line("output", "derived", i), fmt.Sprintf("output.derived[%d].name", i), "missing: name the derived quantity (it names its table, derived-NAME.csv)")
			continue
		}
		if first, dup := seen[name]; dup {
			l, f := at("name")
			c.errf(l, f, "%q is the name of the derived quantity on line %d too: give each a name of its own", name, first)
			continue
		}
		seen[name], _ = at("name")
		if d.Kind == "" {
			c.errf(c.line("output", "derived", i), fmt.Sprintf("output.derived[%d].kind", i), "missing: give the kind (%s)", strings.Join(names(derive.Kinds()), ", "))
			continue
		}
		var kind derive.Kind
		if err := kind.UnmarshalText([]byte(d.Kind)); err != nil {
			l, f := at("kind")
			c.errf(l, f, "%v", err)
			continue
		}
		if a.Truth == nil {
			continue // refused already
		}
		spec := derive.Spec{Name: name, Region: d.Region, Kind: kind, Axes: d.Axes, PerSlice: d.PerSlice,
			DivideByWidths: d.DivideByWidths, Luminosity: d.Luminosity}
		q, err := derive.New(a.Truth, spec, a.Output.Luminosity)
		if err != nil {
			key, msg := "name", err.Error()
			if se, ok := err.(*derive.SpecError); ok {
				key, msg = derivedFields[se.Field], se.Msg
			}
			if key == "luminosity" && msg == "no integrated luminosity is given" {
				msg = "no integrated luminosity is given: set output.luminosity"
			}
			l, f := at(key)
			if c.keyLine("output", "derived", i, key) == 0 {
				l = c.line("output", "derived", i)
			}
			c.errf(l, f, "%s", msg)
			continue
		}
		a.Output.Derived = append(a.Output.Derived, q)
	}
}

// derivedFit gives the derived quantities to the problem p, whose
// sources then propagate their covariances by themselves, after checking
// that their dense covariances fit under the memory limit of s: a
// quantity too large is refused at output.derived, with its size.
func (a *Analysis) derivedFit(p *unfold.Problem, s *unfold.Settings) error {
	if len(a.Output.Derived) == 0 {
		return nil
	}
	rs, err := s.Resolve()
	if err != nil {
		return err
	}
	var ds []unfold.Derived
	largest := a.Output.Derived[0]
	for _, q := range a.Output.Derived {
		ds = append(ds, q)
		if q.Len() > largest.Len() {
			largest = q
		}
	}
	if rs.Covariance != unfold.NoCovariance {
		if err := unfold.CheckDerived(ds, a.Truth.Len(), a.Reco.Len(), rs.MemoryLimit); err != nil {
			return &Error{File: a.File, Line: a.derivedLine, Field: "output.derived", Err: err,
				Msg: fmt.Sprintf("%v (the largest is %q; unfolding.memory_limit_gib sets the limit)", err, largest.Spec().Name)}
		}
	}
	p.Derived = ds
	return nil
}
