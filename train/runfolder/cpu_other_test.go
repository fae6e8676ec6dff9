//go:build !(linux || darwin || freebsd)

package runfolder

// cpuSeconds is not measured here.
func cpuSeconds() float64 { return 0 }
