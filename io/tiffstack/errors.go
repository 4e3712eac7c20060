package tiffstack

// A FormatError reports that the input is not a valid TIFF or BigTIFF file, or that its
// structure contradicts itself (a strip past the end of the file, an IFD chain that
// loops, pages of different sizes).
type FormatError string

func (e FormatError) Error() string { return "tiff: invalid format: " + string(e) }

// An UnsupportedError reports that the input is a valid TIFF that uses a feature
// tripass does not read (a compression scheme, colour samples, a sample type).
type UnsupportedError string

func (e UnsupportedError) Error() string { return "tiff: unsupported feature: " + string(e) }
