// Package methods names the unfolding methods that the analysis file and
// the command line can choose. Each method is a package below this one
// implementing unfold.Method; its name here is the value of the method
// choice in both front ends, spelled once, and so is which settings are
// a method's own.
package methods

import (
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
