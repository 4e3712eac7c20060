//go:build !linux

package tiffstack

import "os"

// startWriteback does nothing where sync_file_range(2) does not exist; Close's fsync
// does all the work.
func startWriteback(f *os.File, off, n int64) {}
