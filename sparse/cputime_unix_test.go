//go:build unix

package sparse

import "syscall"

// cpuSeconds returns the user and system CPU time of the process so
// far, the steadier measure of a kernel on a host whose cores are
// shared with other processes.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}
