//go:build !linux

package condstats

// adviseHuge is a no-op outside Linux.
func adviseHuge(v []float64) {}
