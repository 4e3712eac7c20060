//go:build unix

package main

import (
	"runtime"
	"syscall"
)

// peakRSS returns the largest resident set size the process has had, in bytes
// (getrusage's ru_maxrss: kibibytes on Linux and the BSDs, bytes on macOS).
func peakRSS() uint64 {
	var ru syscall.Rusage
	if err := syscall.Getrusage(syscall.RUSAGE_SELF, &ru); err != nil || ru.Maxrss <= 0 {
		return 0
	}
	if runtime.GOOS == "darwin" || runtime.GOOS == "ios" {
		return uint64(ru.Maxrss)
	}
	return uint64(ru.Maxrss) * 1024
}
