// Package methods names the unfolding methods that the analysis file and
// the command line can choose. Each method is a package below this one
// implementing unfold.Method; its name here is the value of the method
// choice in both front ends, spelled once.
package methods

import "github.com/desmear/desmear/unfold/methods/bayes"

// Default is the method used when none is chosen: the D'Agostini
// iterative Bayesian method.
const Default = bayes.Name

// Names returns the names of the methods, the default first.
func Names() []string { return []string{bayes.Name} }
