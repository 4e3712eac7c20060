// Package rawstack reads and writes raw binary stacks: headerless files of voxel
// samples whose size, sample type, byte order and header offset are not stored in the
// file but given by the caller (on tripass's command line, by flags).
//
// A raw stack is offset bytes of anything (a header of some other format that tripass
// skips), then NZ slices of NY rows of NX samples, x fastest, each sample in the given
// byte order. Reader streams the slices in order through large buffered reads and can
// seek to any slice (volume.SliceSeeker); Writer takes slices in order and writes them
// under a temporary name beside the target, renamed to the target only by a successful
// Close after every slice (internal/atomicfile), so a failed run never leaves a file
// that looks finished.
//
// Samples reach the caller as little-endian bytes, the layout of volume.Slice, whatever
// the file's byte order: big-endian files are swapped on the way in and out.
//
// Because nothing in a raw file describes it, the only check a reader can make is the
// file's size. Open refuses a file shorter than offset + NX·NY·NZ·size and accepts a
// longer one (instruments and other programs append footers and padding); Reader.Extra
// reports the bytes left over so that a caller can warn that the size it was given may
// be wrong.
package rawstack
