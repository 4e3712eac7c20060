package main

import (
	"errors"
	"fmt"
	"os"
	"syscall"
)

// writeFailure turns a failed write of an output into one line in the user's terms
// that names the output and what happened, with ExitIO; nil when err is not a failure
// of the file system that it knows. The Go runtime ignores SIGXFSZ (os/signal: "other
// signals ... cause no action"), so a write past the file-size limit of `ulimit -f`
// fails with EFBIG instead of killing the process, and ends here.
func writeFailure(outPath string, slice int, err error) error {
	var why string
	switch {
	case errors.Is(err, syscall.EFBIG):
		why = "the file-size limit was reached (see ulimit -f), or the file system cannot hold a file this large"
	case errors.Is(err, syscall.ENOSPC):
		why = "the disk is full"
	case errors.Is(err, os.ErrPermission):
		why = "permission denied"
	default:
		return nil
	}
	cause := err
	var pe *os.PathError
	if errors.As(err, &pe) {
		cause = pe.Err
	}
	return &exitError{ExitIO, fmt.Errorf("%s: writing output slice %d failed: %s (%v); nothing was left under this name and the input is untouched",
		outPath, slice, why, cause)}
}
