package rawstack

import (
	"encoding/binary"
	"fmt"
)

// A FormatError reports a raw stack that cannot hold the volume it was described as,
// or a description that cannot be used: a file too short for the size, sample type and
// offset given, a file that ended while it was read, or an invalid size or offset.
// Failures of the file system itself (permissions, a full disk) are returned as the
// operating system's errors, wrapped with the "raw: " prefix, so that callers can tell
// bad input from a failing disk.
type FormatError struct {
	Path string // the file
	Msg  string // what is wrong, in words
	Err  error  // the underlying cause (volume.ErrSize, io.ErrUnexpectedEOF), or nil
}

func (e *FormatError) Error() string {
	s := "raw: " + e.Path + ": " + e.Msg
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	return s
}

// Unwrap returns the underlying cause, so that errors.Is(err, io.ErrUnexpectedEOF)
// and errors.Is(err, volume.ErrSize) work through a FormatError.
func (e *FormatError) Unwrap() error { return e.Err }

// ioError wraps an error of the file system with the package prefix and the file name
// (once: *os.PathError already carries it).
func ioError(path, op string, err error) error {
	return fmt.Errorf("raw: %s: %s: %w", path, op, err)
}

// isBigEndian reports whether order stores the most significant byte first. It asks
// order itself, so any binary.ByteOrder works (binary.NativeEndian included); nil
// means little-endian.
func isBigEndian(order binary.ByteOrder) bool {
	if order == nil {
		return false
	}
	var b [2]byte
	order.PutUint16(b[:], 1)
	return b[0] == 0
}

// orderName is the name of a byte order in messages.
func orderName(big bool) string {
	if big {
		return "big-endian"
	}
	return "little-endian"
}
