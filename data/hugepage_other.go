//go:build !linux

package data

// adviseHuge is a no-op outside Linux.
func adviseHuge(v []float64) {}
