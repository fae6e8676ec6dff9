package condstats

import (
	"syscall"
	"unsafe"
)

// adviseHuge asks the kernel to back the 2 MiB-aligned middle of v with
// transparent huge pages (madvise MADV_HUGEPAGE; honoured when THP is in
// "madvise" or "always" mode, ignored otherwise). For accumulators of
// gigabytes touched in random rows this saves most page faults and TLB
// misses. Small slices are left alone; errors are ignored (it is advice).
func adviseHuge(v []float64) {
	const huge = 2 << 20
	if len(v)*8 < 2*huge {
		return
	}
	p := uintptr(unsafe.Pointer(&v[0]))
	off := (huge - p%huge) % huge
	n := (uintptr(len(v))*8 - off) &^ (huge - 1)
	if n == 0 {
		return
	}
	_ = syscall.Madvise(unsafe.Slice((*byte)(unsafe.Add(unsafe.Pointer(&v[0]), off)), n), syscall.MADV_HUGEPAGE)
}
