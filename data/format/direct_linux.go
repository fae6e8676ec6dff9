//go:build linux

package format

import (
	"io"
	"os"
	"syscall"
	"unsafe"

	"golang.org/x/sys/unix"
)

// directAlign is the alignment of O_DIRECT reads: file offsets, lengths
// and buffer addresses are multiples of it (4 KiB covers the logical
// block size of every disk Linux drives).
const directAlign = 4096

// DirectMinBytes is the file size from which Direct reads a file that is
// mostly not in the page cache past the cache: smaller files are read
// through it (they may well be read again, and the copy costs little).
// Tests lower it.
var DirectMinBytes int64 = 1 << 30

// DirectReader reads whole rows of the file of an NPYStream with O_DIRECT:
// the disk writes the rows straight into the caller's buffer, with no copy
// through the page cache. On the virtual machines stria is measured on,
// that copy (and the cache's bookkeeping) costs the kernel one to two
// CPU-seconds per gigabyte read, as much as the sums of the pass; a file
// of tens of gigabytes read once gains nothing from being cached and
// would evict everything else. The values read are the file's bytes
// either way.
type DirectReader struct {
	s *NPYStream
	f *os.File
}

// Direct returns a DirectReader for the stream's file, or nil where the
// page cache should be used: a stream that is not whole rows of
// little-endian float32 values (Columns of a part of the rows, other
// types), a file smaller than DirectMinBytes or at least half of it in
// the page cache already (unless always), a file system that refuses
// O_DIRECT. It opens the file a second time: close the reader when done.
func (s *NPYStream) Direct(always bool) *DirectReader {
	if !s.contiguous() || !s.direct(4) || s.rows == 0 || s.cols == 0 {
		return nil
	}
	st, err := s.f.Stat()
	if err != nil {
		return nil
	}
	if !always && (st.Size() < DirectMinBytes || residentFraction(s.f, st.Size()) >= 0.5) {
		return nil
	}
	f, err := os.OpenFile(s.name, os.O_RDONLY|syscall.O_DIRECT, 0)
	if err != nil {
		return nil
	}
	// The same file as the stream's (not one put in its place since),
	// and one that reads (a file system may accept the flag and refuse
	// the reads).
	st2, err := f.Stat()
	d := &DirectReader{s: s, f: f}
	if err != nil || !os.SameFile(st, st2) {
		f.Close()
		return nil
	}
	if _, err := d.ReadRows32(d.Buffer(1), 0, 1); err != nil {
		f.Close()
		return nil
	}
	return d
}

// Close closes the reader's file (not the stream's).
func (d *DirectReader) Close() error { return d.f.Close() }

// Buffer returns a buffer for reads of up to rows rows, aligned for
// O_DIRECT.
func (d *DirectReader) Buffer(rows int) []byte {
	n := int(int64(rows)*d.s.rowBytes) + 2*directAlign
	raw := make([]byte, n+directAlign)
	off := (directAlign - int(uintptr(unsafe.Pointer(&raw[0]))%directAlign)) % directAlign
	return raw[off : off+n]
}

// ReadRows32 reads rows [lo, hi) into buf (from Buffer, of at least hi-lo
// rows) and returns them as float32 in C order: a slice of buf, valid
// until buf is read into again. The read covers the rows' bytes rounded
// out to directAlign.
func (d *DirectReader) ReadRows32(buf []byte, lo, hi int) ([]float32, error) {
	s := d.s
	s.checkRange("DirectReader.ReadRows32", s.cols*(hi-lo), lo, hi)
	if hi == lo {
		return nil, nil
	}
	start, end := s.pos(lo, 0), s.pos(hi, 0)
	a0 := start &^ (directAlign - 1)
	a1 := (end + directAlign - 1) &^ (directAlign - 1)
	if a1-a0 > int64(len(buf)) {
		panic("data: DirectReader.ReadRows32: buffer too small for the rows")
	}
	b := buf[:a1-a0]
	n, err := d.f.ReadAt(b, a0)
	if err == io.EOF && int64(n) >= end-a0 {
		err = nil // the last rows end before the aligned end
	}
	if err != nil {
		return nil, s.readErr(err, lo, 0)
	}
	v := b[start-a0 : end-a0]
	return unsafe.Slice((*float32)(unsafe.Pointer(&v[0])), (hi-lo)*s.cols), nil
}

// residentFraction is the share of the pages of the file f (size bytes)
// in the page cache (mincore over a read-only mapping); 1 when it cannot
// tell, so that the cache is used.
func residentFraction(f *os.File, size int64) float64 {
	if size <= 0 || int64(int(size)) != size {
		return 1
	}
	m, err := unix.Mmap(int(f.Fd()), 0, int(size), unix.PROT_READ, unix.MAP_SHARED)
	if err != nil {
		return 1
	}
	defer unix.Munmap(m)
	page := int64(os.Getpagesize())
	vec := make([]byte, (size+page-1)/page)
	if _, _, e := syscall.Syscall(syscall.SYS_MINCORE, uintptr(unsafe.Pointer(&m[0])), uintptr(len(m)), uintptr(unsafe.Pointer(&vec[0]))); e != 0 {
		return 1
	}
	in := 0
	for _, v := range vec {
		in += int(v & 1)
	}
	return float64(in) / float64(len(vec))
}
