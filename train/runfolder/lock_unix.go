//go:build unix

package runfolder

import (
	"errors"
	"syscall"
)

// processAlive reports whether a process with the pid runs on this host.
func processAlive(pid int) bool {
	err := syscall.Kill(pid, 0)
	return err == nil || errors.Is(err, syscall.EPERM)
}
