package tiffstack

import "fmt"

// A FormatError reports that the input is not a valid TIFF or BigTIFF file, or that its
// structure contradicts itself (a strip past the end of the file, an IFD chain that
// loops, pages of different sizes).
type FormatError string

func (e FormatError) Error() string { return "tiff: invalid format: " + string(e) }

// An UnsupportedError reports that the input is a valid TIFF that uses a feature
// tripass does not read (a compression scheme, colour samples, a sample type).
type UnsupportedError string

func (e UnsupportedError) Error() string { return "tiff: unsupported feature: " + string(e) }

// within adds context (a page, a strip) to err. Inside a FormatError or
// UnsupportedError it goes after the "tiff: ..." prefix, so that a message reads
// "stack.tif: tiff: invalid format: page 3: strip 0: ...".
func within(ctx string, err error) error {
	switch e := err.(type) {
	case FormatError:
		return FormatError(ctx + ": " + string(e))
	case UnsupportedError:
		return UnsupportedError(ctx + ": " + string(e))
	}
	return fmt.Errorf("%s: %w", ctx, err)
}
