package rawstack

import (
	"bufio"
	"encoding/binary"
	"fmt"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// CreateResumable is Create with a temporary file of fixed name (atomicfile.PartName of
// path), so that a run that is interrupted or killed can be continued by Resume. Call
// Sync from time to time to learn how much is durable; Suspend keeps the partial file
// when the run stops early.
func CreateResumable(path string, h volume.Header, order binary.ByteOrder, overwrite bool) (*Writer, error) {
	if err := h.Validate(); err != nil {
		return nil, &FormatError{Path: path, Msg: "invalid description", Err: err}
	}
	f, err := atomicfile.CreatePart(path, overwrite)
	if err != nil {
		return nil, fmt.Errorf("raw: %w", err)
	}
	return newPartWriter(path, f, h, order, 0), nil
}

// Resume continues the partial file of an interrupted CreateResumable run with the same
// path, header and byte order, after its first done slices: the file is cut back to
// the bytes of those slices and the next WriteSlice writes slice done. The result is
// byte for byte the file an uninterrupted run writes.
func Resume(path string, h volume.Header, order binary.ByteOrder, overwrite bool, done int) (*Writer, error) {
	if err := h.Validate(); err != nil {
		return nil, &FormatError{Path: path, Msg: "invalid description", Err: err}
	}
	if done < 0 || done > h.NZ {
		return nil, fmt.Errorf("raw: %s: cannot resume after slice %d of %d", path, done, h.NZ)
	}
	f, err := atomicfile.OpenPart(path, overwrite)
	if err != nil {
		return nil, fmt.Errorf("raw: %w", err)
	}
	if err := f.ContinueAt(int64(done) * int64(h.SliceBytes())); err != nil {
		f.Detach()
		return nil, fmt.Errorf("raw: %s: %w", path, err)
	}
	return newPartWriter(path, f, h, order, done), nil
}

func newPartWriter(path string, f *atomicfile.File, h volume.Header, order binary.ByteOrder, done int) *Writer {
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
		z:    done,
	}
}

// Sync makes every slice written so far durable (it flushes the buffer and syncs the
// file) and returns how many slices that is and the length of the file.
func (w *Writer) Sync() (slices int, size int64, err error) {
	if w.closed {
		return 0, 0, fmt.Errorf("raw: %s: Sync after Close or Abort", w.path)
	}
	if w.err != nil {
		return 0, 0, w.err
	}
	if err := w.bw.Flush(); err != nil {
		w.err = ioError(w.path, "writing", err)
		return 0, 0, w.err
	}
	if err := w.f.File.Sync(); err != nil {
		w.err = ioError(w.path, "syncing", err)
		return 0, 0, w.err
	}
	return w.z, int64(w.z) * int64(w.h.SliceBytes()), nil
}

// Suspend stops writing but keeps the partial file for Resume: it syncs what was
// written, closes the file and returns what Sync returns.
func (w *Writer) Suspend() (slices int, size int64, err error) {
	slices, size, err = w.Sync()
	w.closed = true
	if derr := w.f.Detach(); err == nil && derr != nil {
		err = ioError(w.path, "syncing", derr)
	}
	return slices, size, err
}
