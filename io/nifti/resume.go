package nifti

import (
	"bytes"
	"fmt"
	"io"
	"strings"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// Resumable reports whether path names an output that CreateResumable and Resume can
// continue after an interruption: a .nii file. A .nii.gz file is one gzip stream
// compressed in parallel blocks; continuing it would need the compressor's state at
// the cut, so an interrupted .nii.gz is written again from the start.
func Resumable(path string) bool {
	return strings.HasSuffix(strings.ToLower(path), ".nii")
}

// CreateResumable is Create for a .nii file with a temporary file of fixed name
// (atomicfile.PartName of path), so that a run that is interrupted or killed can be
// continued by Resume. Call Sync from time to time to learn how much is durable;
// Suspend keeps the partial file when the run stops early.
func CreateResumable(path string, h volume.Header, opt WriteOptions) (*Writer, error) {
	return openPart(path, h, opt, 0)
}

// Resume continues the partial file of an interrupted CreateResumable run with the same
// path, header and options after its first done slices: the header must be the one
// this run writes, the file is cut back to the end of those slices, and the next
// WriteSlice writes slice done. The result is byte for byte the file of an
// uninterrupted run.
func Resume(path string, h volume.Header, opt WriteOptions, done int) (*Writer, error) {
	if done < 0 || done > h.NZ {
		return nil, fmt.Errorf("nifti: %s: cannot resume after slice %d of %d", path, done, h.NZ)
	}
	return openPart(path, h, opt, done)
}

func openPart(path string, h volume.Header, opt WriteOptions, done int) (*Writer, error) {
	if !Resumable(path) {
		return nil, &UnsupportedError{Path: path, Msg: "only .nii outputs can be resumed"}
	}
	// Create checks the path, header and options; its temporary file, still empty
	// (the header waits in the buffer), gives way to the partial file of fixed name.
	w, err := Create(path, h, opt)
	if err != nil {
		return nil, err
	}
	w.f.Abort()
	o := PlainOrientation(h)
	if opt.Orientation != nil {
		o = *opt.Orientation
	}
	hdr := encodeHeader(h, o, descripField(opt.Description))
	if done == 0 {
		w.f, err = atomicfile.CreatePart(path, opt.Overwrite)
	} else {
		w.f, err = atomicfile.OpenPart(path, opt.Overwrite)
	}
	if err != nil {
		w.closed = true
		return nil, fmt.Errorf("nifti: %w", err)
	}
	w.bw.Reset(w.f)
	w.w = w.bw
	if done == 0 {
		if _, err := w.bw.Write(hdr); err != nil {
			w.Abort()
			return nil, fmt.Errorf("nifti: %s: writing the header: %w", path, err)
		}
		return w, nil
	}
	got := make([]byte, len(hdr))
	if _, err := io.ReadFull(w.f.File, got); err != nil || !bytes.Equal(got, hdr) {
		w.closed = true
		w.f.Detach()
		return nil, fmt.Errorf("nifti: %s: the partial output %s does not start with this run's header", path, w.f.File.Name())
	}
	if err := w.f.ContinueAt(int64(len(hdr)) + int64(done)*int64(h.SliceBytes())); err != nil {
		w.closed = true
		w.f.Detach()
		return nil, fmt.Errorf("nifti: %s: %w", path, err)
	}
	w.z = done
	return w, nil
}

// Sync makes every slice written so far to a .nii file durable (it flushes the buffer
// and syncs the file) and returns how many slices that is and the file's length.
func (w *Writer) Sync() (slices int, size int64, err error) {
	switch {
	case w.closed:
		return 0, 0, fmt.Errorf("nifti: %s: Sync after Close or Abort", w.path)
	case w.err != nil:
		return 0, 0, w.err
	case w.gz != nil:
		return 0, 0, &UnsupportedError{Path: w.path, Msg: "a .nii.gz output cannot be resumed"}
	}
	if err := w.bw.Flush(); err != nil {
		w.err = fmt.Errorf("nifti: %s: writing: %w", w.path, err)
		return 0, 0, w.err
	}
	if err := w.f.File.Sync(); err != nil {
		w.err = fmt.Errorf("nifti: %s: syncing: %w", w.path, err)
		return 0, 0, w.err
	}
	st, err := w.f.File.Stat()
	if err != nil {
		return 0, 0, fmt.Errorf("nifti: %s: %w", w.path, err)
	}
	return w.z, st.Size(), nil
}

// Suspend stops writing but keeps the partial .nii file for Resume: it syncs what was
// written, closes the file and returns what Sync returns.
func (w *Writer) Suspend() (slices int, size int64, err error) {
	slices, size, err = w.Sync()
	w.closed = true
	if derr := w.f.Detach(); err == nil && derr != nil {
		err = fmt.Errorf("nifti: %s: syncing: %w", w.path, derr)
	}
	return slices, size, err
}
