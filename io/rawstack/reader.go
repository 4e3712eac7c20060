package rawstack

import (
	"bufio"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"

	"github.com/tripass/tripass/volume"
)

// bufSize is the size of the read and write buffers. Slices at least this large are
// read and written directly, bypassing the buffer; smaller ones are gathered into
// reads and writes of this size, large enough that the cost of a system call is lost
// in the cost of moving the bytes (common practice).
const bufSize = 1 << 20

// Reader reads a raw stack slice by slice. It implements volume.Source and
// volume.SliceSeeker. A Reader is not safe for concurrent use.
type Reader struct {
	path   string
	f      io.ReadSeekCloser
	br     *bufio.Reader
	h      volume.Header
	swap   bool  // file is big-endian and samples are wider than a byte
	offset int64 // bytes before the first slice
	extra  int64 // bytes after the last slice
	z      int   // the slice the next ReadSlice returns
}

var (
	_ volume.Source      = (*Reader)(nil)
	_ volume.SliceSeeker = (*Reader)(nil)
)

// Open opens the raw stack at path, described by h (size, sample type and spacing),
// stored in the byte order order (nil means little-endian) after offset bytes of
// anything. It checks h, and checks that the file holds at least offset + h.Bytes()
// bytes; a longer file is accepted, and Extra tells by how much.
func Open(path string, h volume.Header, order binary.ByteOrder, offset int64) (*Reader, error) {
	if err := checkDescription(path, h, offset); err != nil {
		return nil, err
	}
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("raw: %w", err)
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("raw: %w", err)
	}
	if !st.Mode().IsRegular() {
		f.Close()
		return nil, &FormatError{Path: path, Msg: "not a regular file"}
	}
	r, err := newReader(path, f, st.Size(), h, order, offset)
	if err != nil {
		f.Close()
		return nil, err
	}
	return r, nil
}

// checkDescription checks what the caller says about a raw file before it is opened.
func checkDescription(path string, h volume.Header, offset int64) error {
	if err := h.Validate(); err != nil {
		return &FormatError{Path: path, Msg: "invalid description", Err: err}
	}
	if offset < 0 {
		return &FormatError{Path: path, Msg: fmt.Sprintf("negative offset %d", offset)}
	}
	return nil
}

// newReader reads a raw stack of size bytes from f, positioned anywhere. Open and the
// fuzz tests share it; it does not close f on error.
func newReader(path string, f io.ReadSeekCloser, size int64, h volume.Header, order binary.ByteOrder, offset int64) (*Reader, error) {
	if err := checkDescription(path, h, offset); err != nil {
		return nil, err
	}
	// h.Validate bounds h.Bytes() by 2^43, so offset + need overflows only for an
	// offset near 2^63; compare without adding.
	need := h.Bytes()
	if size < need || size-need < offset {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf(
			"file is %d bytes, too short for %d×%d×%d %v (%d bytes) after an offset of %d bytes",
			size, h.NX, h.NY, h.NZ, h.Type, need, offset)}
	}
	if _, err := f.Seek(offset, io.SeekStart); err != nil {
		return nil, ioError(path, "seek", err)
	}
	n := bufSize
	if int64(n) > need {
		n = int(need) // a small file needs no large buffer
	}
	if n < 16 {
		n = 16 // bufio's minimum
	}
	return &Reader{
		path:   path,
		f:      f,
		br:     bufio.NewReaderSize(f, n),
		h:      h,
		swap:   isBigEndian(order) && h.Type.Size() > 1,
		offset: offset,
		extra:  size - offset - need,
	}, nil
}

// Header returns the header the stack was opened with.
func (r *Reader) Header() volume.Header { return r.h }

// Extra is the number of bytes in the file after the last slice. Raw files are
// described by the caller, so a non-zero Extra may mean a footer, or a size, type or
// offset that does not match the file.
func (r *Reader) Extra() int64 { return r.extra }

// ReadSlice reads the next slice into dst, resizing it, and returns io.EOF after the
// last. Samples arrive little-endian whatever the file's byte order. A file that ends
// early (it shrank after Open) gives a *FormatError wrapping io.ErrUnexpectedEOF.
func (r *Reader) ReadSlice(dst *volume.Slice) error {
	if r.z >= r.h.NZ {
		return io.EOF
	}
	dst.Reset(r.h.NX, r.h.NY, r.h.Type)
	if _, err := io.ReadFull(r.br, dst.Data); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return &FormatError{Path: r.path, Msg: fmt.Sprintf("slice %d of %d", r.z, r.h.NZ), Err: io.ErrUnexpectedEOF}
		}
		return ioError(r.path, fmt.Sprintf("reading slice %d", r.z), err)
	}
	if r.swap {
		swapBytes(dst.Data, r.h.Type.Size())
	}
	r.z++
	return nil
}

// SeekSlice makes the next ReadSlice return slice z (0 ≤ z ≤ NZ; z = NZ gives io.EOF).
func (r *Reader) SeekSlice(z int) error {
	if z < 0 || z > r.h.NZ {
		return fmt.Errorf("raw: %s: seek to slice %d of a stack of %d slices", r.path, z, r.h.NZ)
	}
	pos := r.offset + int64(z)*int64(r.h.SliceBytes())
	if _, err := r.f.Seek(pos, io.SeekStart); err != nil {
		return ioError(r.path, "seek", err)
	}
	r.br.Reset(r.f)
	r.z = z
	return nil
}

// Close closes the file.
func (r *Reader) Close() error {
	if r.f == nil {
		return nil
	}
	err := r.f.Close()
	r.f = nil
	if err != nil {
		return fmt.Errorf("raw: %w", err)
	}
	return nil
}
