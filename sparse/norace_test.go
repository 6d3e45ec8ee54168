//go:build !race

package sparse

// raceBuild is set in builds with the race detector, whose
// instrumentation changes the code the compiler emits for the Go loops.
const raceBuild = false
