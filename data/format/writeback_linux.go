//go:build linux && (amd64 || arm64)

package format

import (
	"os"
	"syscall"
)

// startWriteback asks the kernel to start writing f's dirty pages to the
// disk without waiting for them (sync_file_range with
// SYNC_FILE_RANGE_WRITE over the whole file). It is a hint: its errors
// are ignored, and the final Sync still decides whether the data reached
// the disk.
func startWriteback(f *os.File) {
	const syncFileRangeWrite = 2
	syscall.Syscall6(syscall.SYS_SYNC_FILE_RANGE, f.Fd(), 0, 0, syncFileRangeWrite, 0, 0)
}
