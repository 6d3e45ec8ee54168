// Command desmear unfolds multidimensional detector-level spectra with
// the D'Agostini iterative Bayesian method on sparse response matrices.
//
// Run "desmear help" for the commands and "desmear demo" for a worked
// example. The physics and numerics live in the library packages
// (binning, sparse, unfold and their sub-packages); this program parses,
// loads, calls and prints.
package main
