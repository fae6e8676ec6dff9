//go:build linux || darwin || freebsd

package data

import (
	"os"
	"syscall"
	"unsafe"
)

// mapThreshold is the data size above which the fast layout is mapped
// rather than read: below it a read is as quick and keeps no mapping.
var mapThreshold int64 = 64 << 20

// mapFloat32 maps the float32 data of an .npy file that starts at offset
// off and holds n values, copy-on-write: the values come straight from the
// page cache, with no read into fresh memory (which costs seconds per GB on
// some virtual machines), and writes to the slice change only this
// process's copy, never the file. The mapping lives until the process ends.
// It returns nil when the file cannot be mapped; the caller then reads it.
func mapFloat32(f *os.File, off int64, n int) []float32 {
	if n == 0 || off%4 != 0 || int64(n)*4 < mapThreshold {
		return nil
	}
	size := off + int64(n)*4
	b, err := syscall.Mmap(int(f.Fd()), 0, int(size), syscall.PROT_READ|syscall.PROT_WRITE, syscall.MAP_PRIVATE)
	if err != nil {
		return nil
	}
	return unsafe.Slice((*float32)(unsafe.Pointer(&b[off])), n)
}
