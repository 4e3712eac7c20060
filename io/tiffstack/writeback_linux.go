package tiffstack

import (
	"os"

	"golang.org/x/sys/unix"
)

// startWriteback asks the kernel to start writing bytes [off, off+n) of f to disk
// without waiting (sync_file_range(2) with SYNC_FILE_RANGE_WRITE). The final fsync in
// Close then finds most of the file already on its way, so the disk works while the
// next slices are encoded instead of after the last one. Errors are ignored: the
// fsync that follows reports any that matter.
func startWriteback(f *os.File, off, n int64) {
	unix.SyncFileRange(int(f.Fd()), off, n, unix.SYNC_FILE_RANGE_WRITE)
}
