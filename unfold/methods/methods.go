// Package methods names the unfolding methods that the analysis file and
// the command line can choose. Each method is a package below this one
// implementing unfold.Method; its name here is the value of the method
// choice in both front ends, spelled once, and so is which settings are
// a method's own.
package methods

import (
	"github.com/desmear/desmear/unfold"
	"github.com/desmear/desmear/unfold/methods/bayes"
	"github.com/desmear/desmear/unfold/methods/binbybin"
	"github.com/desmear/desmear/unfold/methods/inversion"
	"github.com/desmear/desmear/unfold/methods/tikhonov"
)

// Default is the method used when none is chosen: the D'Agostini
// iterative Bayesian method.
const Default = bayes.Name

// Names returns the names of the methods, the default first.
func Names() []string {
	return []string{bayes.Name, tikhonov.Name, inversion.Name, binbybin.Name}
}

// own maps the settings fields that belong to one method only (the
// field names of its settings type) to that method.
var own = map[string]string{
	"Iterations":    bayes.Name,
	"StopChi2":      bayes.Name,
	"MaxIterations": bayes.Name,
	"Smoothing":     bayes.Name,
	"Tau":           tikhonov.Name,
	"Criterion":     tikhonov.Name,
	"Penalty":       tikhonov.Name,
	"Widths":        tikhonov.Name,
	"Bias":          tikhonov.Name,
}

// Owner returns the method whose own setting the field is, or "" for a
// setting every method shares (the fields of unfold.Settings). The front
// ends refuse a method's own setting given with another method.
func Owner(field string) string { return own[field] }

// Fixed returns the method m with the regularisation its result chose
// (details, the unfold.Result's Details) fixed, as a family for a toy
// ensemble of the validate package: the method at strength k = 1..K,
// whose K-th is m at its chosen regularisation. For the iterative method
// that is k iterations and K the iterations made (so that a stopping
// rule's choice is kept, and the toys unfold once with the steps kept);
// for Tikhonov the chosen tau at K = 1 (the toys do not choose it
// again); the other methods have no regularisation (K = 1).
func Fixed(m unfold.Method, details any) (family func(k int) unfold.Method, K int) {
	switch m := m.(type) {
	case *bayes.Settings:
		if d, ok := details.(*bayes.Details); ok {
			return m.WithIterations, d.Iterations
		}
	case *tikhonov.Settings:
		if d, ok := details.(*tikhonov.Details); ok {
			var t tikhonov.Settings
			if m != nil {
				t = *m
			}
			t.Tau, t.Criterion = d.Tau, tikhonov.LCurve
			return func(int) unfold.Method { return &t }, 1
		}
	}
	return func(int) unfold.Method { return m }, 1
}
