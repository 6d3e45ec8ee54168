//go:build !unix

package sparse

// cpuSeconds is not measured on this system: benchmarks report no CPU
// times.
func cpuSeconds() float64 { return 0 }
