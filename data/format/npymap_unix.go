//go:build linux || darwin || freebsd

package format

import (
	"os"
	"syscall"
	"unsafe"
)

// MapThreshold is the data size above which the fast layout is mapped
// rather than read: below it a read is as quick and keeps no mapping.
// Tests (here and in package data) lower it to map small files.
var MapThreshold int64 = 64 << 20

// mapFloat32 maps the float32 data of the .npy file f (called name) that
// start at offset off and hold n values, copy-on-write: the values come
// straight from the page cache, with no read into fresh memory (which costs
// seconds per GB on some virtual machines), and writes to the slice change
// only this process's copy, never the file. The mapping lives until the
// process ends and is registered, so that Guard can name the file when a
// read of it faults (the file was truncated under stria).
//
// It returns nil when the file cannot be mapped, or when it no longer has
// the size the header announced once mapped (it changed between the size
// check and the mapping); the caller then reads it, which reports the size.
func mapFloat32(f *os.File, off int64, n int, name string) []float32 {
	if n == 0 || off%4 != 0 || int64(n)*4 < MapThreshold {
		return nil
	}
	size := off + int64(n)*4
	b, err := syscall.Mmap(int(f.Fd()), 0, int(size), syscall.PROT_READ|syscall.PROT_WRITE, syscall.MAP_PRIVATE)
	if err != nil {
		return nil
	}
	if st, err := f.Stat(); err != nil || st.Size() != size {
		syscall.Munmap(b)
		return nil
	}
	addMapping(b, int(off), name)
	return unsafe.Slice((*float32)(unsafe.Pointer(&b[off])), n)
}
