//go:build unix

package acuity

import "syscall"

// cpuSeconds returns the user + system CPU time of this process, so that the
// benchmarks can report CPU cost on a shared machine where wall time is
// inflated by other jobs.
func cpuSeconds() float64 {
	var ru syscall.Rusage
	if syscall.Getrusage(syscall.RUSAGE_SELF, &ru) != nil {
		return 0
	}
	return float64(ru.Utime.Sec+ru.Stime.Sec) + float64(ru.Utime.Usec+ru.Stime.Usec)/1e6
}
