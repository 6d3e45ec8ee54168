package analysis

import (
	"fmt"
	"slices"
	"strings"

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
