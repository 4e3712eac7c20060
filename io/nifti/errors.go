package nifti

// A FormatError reports a file that is not valid NIfTI-1: a header that contradicts
// itself or the file (wrong sizeof_hdr, a bitpix that does not match the datatype,
// negative dimensions, data past the end of the file), or data that end early.
type FormatError struct {
	Path string // the file
	Msg  string // what is wrong, in words
	Err  error  // the underlying cause (io.ErrUnexpectedEOF, gzip.ErrChecksum, volume.ErrSize), or nil
}

func (e *FormatError) Error() string {
	s := "nifti: " + e.Path + ": " + e.Msg
	if e.Err != nil {
		s += ": " + e.Err.Error()
	}
	return s
}

// Unwrap returns the underlying cause.
func (e *FormatError) Unwrap() error { return e.Err }

// An UnsupportedError reports valid NIfTI that tripass does not handle: 4D series,
// complex or RGB data, NIfTI-2, two-file .hdr/.img pairs.
type UnsupportedError struct {
	Path string
	Msg  string
}

func (e *UnsupportedError) Error() string { return "nifti: " + e.Path + ": " + e.Msg }
