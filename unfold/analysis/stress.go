package analysis

import (
	"fmt"
	"strings"

	"github.com/desmear/desmear/unfold/inputs/observable"
	"github.com/desmear/desmear/unfold/validate"
)

// stress checks the stress tests of validation.stress and evaluates
// their weights over the truth binning.
func (c *checker) stress(a *Analysis, docs []stressDoc) {
	seen := map[string]int{}
	for i, d := range docs {
		f := fmt.Sprintf("validation.stress[%d]", i)
		line := c.line("validation", "stress", i)
		name := strings.TrimSpace(d.Name)
		switch {
		case name == "":
			c.errf(line, f+".name", "missing: name the stress test")
			continue
		case strings.HasPrefix(name, "tilt-") || name == "generated" || name == "result":
			c.errf(c.line("validation", "stress", i, "name"), f+".name", "%q is a built-in name (generated, result, tilt-AXIS): choose another", name)
			continue
		}
		if first, dup := seen[name]; dup {
			c.errf(c.line("validation", "stress", i, "name"), f+".name", "%q is the name of the stress test on line %d too: give each a name of its own", name, first)
			continue
		}
		seen[name] = c.line("validation", "stress", i, "name")
		e := c.expr(d.Weight, "validation", "stress", i, "weight")
		if e.Text == "" {
			c.errf(line, f+".weight", "missing: give a weight expression over the truth axes (%s)", strings.Join(a.truthAxes(), ", "))
			continue
		}
		if a.Truth == nil {
			continue // refused already
		}
		x, err := observable.Compile(e.Text, a.Truth.AxisNames())
		if err != nil {
			c.errf(e.Line, e.Field, "in %q: %v (the variables are the truth axes: %s)", e.Text, err, strings.Join(a.truthAxes(), ", "))
			continue
		}
		w, err := validate.Weights(a.Truth, x)
		if err != nil {
			c.errf(e.Line, e.Field, "%v", strings.TrimPrefix(err.Error(), "validate: "))
			continue
		}
		a.Stress = append(a.Stress, Stress{Name: name, Weight: e, Weights: w})
	}
}

// truthAxes returns the axis names of the truth binning (none without
// one).
func (a *Analysis) truthAxes() []string {
	if a.Truth == nil {
		return nil
	}
	return a.Truth.AxisNames()
}
