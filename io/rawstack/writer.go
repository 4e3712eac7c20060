package rawstack

import (
	"bufio"
	"encoding/binary"
	"fmt"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// Writer writes a raw stack slice by slice. It implements volume.Sink: the file is
// written under a temporary name beside the target and appears under the target's
// name only when Close succeeds after all NZ slices were written. A Writer is not safe
// for concurrent use.
type Writer struct {
	path    string
	f       *atomicfile.File
	bw      *bufio.Writer
	h       volume.Header
	swap    bool
	scratch []byte // a slice's bytes in file order, for big-endian output
	z       int    // slices written
	err     error  // the first write error; the output is then discarded
	closed  bool
}

var _ volume.Sink = (*Writer)(nil)

// Create starts a raw stack at path for a volume described by h, in the byte order
// order (nil means little-endian), with no header. An existing file at path is an
// error wrapping atomicfile.ErrExists unless overwrite is true; it is then replaced
// only on a successful Close.
func Create(path string, h volume.Header, order binary.ByteOrder, overwrite bool) (*Writer, error) {
	if err := h.Validate(); err != nil {
		return nil, &FormatError{Path: path, Msg: "invalid description", Err: err}
	}
	f, err := atomicfile.Create(path, overwrite)
	if err != nil {
		return nil, fmt.Errorf("raw: %w", err)
	}
	n := bufSize
	if int64(n) > h.Bytes() {
		n = int(h.Bytes())
	}
	return &Writer{
		path: path,
		f:    f,
		bw:   bufio.NewWriterSize(f, max(n, 16)),
		h:    h,
		swap: isBigEndian(order) && h.Type.Size() > 1,
	}, nil
}

// WriteSlice writes the next slice, which must have the header's size and sample type
// (convert it first with volume.Convert). src is not modified.
func (w *Writer) WriteSlice(src *volume.Slice) error {
	switch {
	case w.closed:
		return fmt.Errorf("raw: %s: write after Close or Abort", w.path)
	case w.err != nil:
		return w.err
	case w.z >= w.h.NZ:
		return fmt.Errorf("raw: %s: slice %d written to a stack of %d slices", w.path, w.z, w.h.NZ)
	case src.NX != w.h.NX || src.NY != w.h.NY || src.Type != w.h.Type:
		return fmt.Errorf("raw: %s: slice %d is %d×%d %v, the stack is %d×%d %v",
			w.path, w.z, src.NX, src.NY, src.Type, w.h.NX, w.h.NY, w.h.Type)
	}
	b := src.Data[:w.h.SliceBytes()]
	if w.swap {
		if w.scratch == nil {
			w.scratch = make([]byte, len(b))
		}
		copy(w.scratch, b)
		swapBytes(w.scratch, w.h.Type.Size())
		b = w.scratch
	}
	if _, err := w.bw.Write(b); err != nil {
		w.err = ioError(w.path, fmt.Sprintf("writing slice %d", w.z), err)
		return w.err
	}
	w.z++
	return nil
}

// Close commits the stack: it flushes and syncs the temporary file and renames it to
// the target. If fewer than NZ slices were written, or a write failed, it discards the
// output instead and returns the error (wrapping volume.ErrShortVolume for missing
// slices), leaving nothing under the target's name.
func (w *Writer) Close() error {
	if w.closed {
		return fmt.Errorf("raw: %s: Close after Close or Abort", w.path)
	}
	w.closed = true
	if w.err != nil {
		w.f.Abort()
		return w.err
	}
	if w.z < w.h.NZ {
		w.f.Abort()
		return fmt.Errorf("raw: %s: %d of %d slices written: %w", w.path, w.z, w.h.NZ, volume.ErrShortVolume)
	}
	if err := w.bw.Flush(); err != nil {
		w.f.Abort()
		return ioError(w.path, "writing", err)
	}
	if err := w.f.Commit(); err != nil {
		return ioError(w.path, "committing", err)
	}
	return nil
}

// Abort discards the output: the temporary file is removed and nothing appears under
// the target's name. It may be called after a failed WriteSlice or Close, and more
// than once; after a successful Close it does nothing.
func (w *Writer) Abort() error {
	w.closed = true
	if err := w.f.Abort(); err != nil {
		return ioError(w.path, "removing the partial output", err)
	}
	return nil
}
