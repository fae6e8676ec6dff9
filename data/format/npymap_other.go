//go:build !(linux || darwin || freebsd)

package format

import "os"

// MapThreshold is unused here: .npy files are always read.
var MapThreshold int64 = 64 << 20

// mapFloat32 is not available here: .npy files are always read.
func mapFloat32(f *os.File, off int64, n int, name string) []float32 { return nil }
