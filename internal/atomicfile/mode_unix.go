//go:build unix

package atomicfile

import (
	"sync"
	"syscall"
)

var (
	umaskOnce sync.Once
	umask     uint32
)

// processUmask returns the process's file-mode creation mask. Reading it means setting
// it, so it is read once and put back at once.
func processUmask() uint32 {
	umaskOnce.Do(func() {
		umask = uint32(syscall.Umask(0))
		syscall.Umask(int(umask))
	})
	return umask
}
