//go:build !unix

package acuity

// cpuSeconds is not measured on this system.
func cpuSeconds() float64 { return 0 }
