//go:build linux || darwin || freebsd

package runfolder

import "syscall"

// cpuSeconds is the processor time this process has used (user + system),
// for benchmarks that report it beside the wall time.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Nano()+ru.Stime.Nano()) / 1e9
}
