// Package tiffstack reads and writes 3D stacks stored as TIFF: a multi-page TIFF 6.0 or
// BigTIFF file with one page (IFD) per z-slice, or a folder of single-page TIFF files,
// one per slice. It streams one slice at a time, so a stack of any depth is read and
// written in the memory of a few slices.
//
// # Reading
//
// Open walks the whole IFD chain when it opens a file and checks it before any voxel
// is read: the chain must not loop or run past the end of the file, every page must
// have the size and sample type of the first, and every strip or tile must lie inside
// the file and be large enough for its page. A damaged stack therefore fails at once,
// with an error that names the file, the page and the problem, instead of halfway
// through a long run; and no count or size read from the file is used to allocate
// anything before it has been checked against the file size and volume's limits.
// OpenFolder does the same for a folder, ordering the files by the last number in
// their names (slice_2 before slice_10) and reading each file's first IFD at open.
//
// Both return a volume.Source that also implements volume.SliceSeeker. They read
// grey images with one sample per pixel: 8-, 16- and 32-bit unsigned, 16- and 32-bit
// signed, 32- and 64-bit IEEE float (SampleFormat); strips or tiles; compression none,
// LZW, Deflate (codes 8 and 32946) and PackBits; the horizontal-differencing predictor
// (TIFF 6.0 Section 14) and the floating-point predictor (Adobe Photoshop TIFF
// Technical Note 3, 2005); either byte order. Reduced-resolution pages (thumbnails,
// NewSubfileType bit 0) are left out of the stack. Slices are decoded straight into
// the caller's buffer, as little-endian samples whatever the file's byte order.
//
// # Writing
//
// Create and CreateFolder return a volume.Sink. They write little-endian files with
// strips of about 256 KiB, uncompressed or compressed with LZW or Deflate, with an
// optional predictor; compression runs on GOMAXPROCS goroutines, one strip each. Each
// page's IFD is written before its strips, so that a file is written front to back in
// one pass although compressed sizes are only known slice by slice. Output goes to a
// temporary name beside the target and is renamed into place by Close once every
// slice has been written (internal/atomicfile), so a failed run leaves nothing under
// the final name. A file switches to BigTIFF by itself when an upper bound of its size
// passes 4 GiB; WriteOptions.BigTIFF forces it.
//
// # Spacing
//
// The x and y spacing are read from XResolution, YResolution and ResolutionUnit (inch
// or centimetre, converted to micrometres) and written in pixels per centimetre. TIFF
// has no tag for the z spacing, so tripass also writes an ImageDescription of its own
// on the first page, "tripass spacing=X,Y,Z unit=U", and reads z and the unit back
// from it. Stacks from microscopes often carry ImageJ-style descriptions (unit and
// z spacing as key=value lines, resolution in pixels per that unit) or OME-XML
// (PhysicalSizeX/Y/Z); both are read, and files whose pages interleave several
// channels, time points or series are refused rather than read as z-slices. Where
// nothing says, the spacing is zero (unknown) and the unit empty.
//
// # Errors
//
// Structural problems are FormatError values and features tripass does not read are
// UnsupportedError values, both with the prefix "tiff: " as in the standard library's
// image packages; Open and the readers wrap them with the file name. A file cut short
// in the middle of a structure reports io.ErrUnexpectedEOF.
package tiffstack
