package tiffstack

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// CreateResumable is Create with a temporary file of fixed name (atomicfile.PartName of
// path), so that a run that is interrupted or killed can be continued by Resume. Call
// Sync from time to time to learn how much is durable; Suspend keeps the partial file
// when the run stops early.
func CreateResumable(path string, h volume.Header, opt WriteOptions) (*Writer, error) {
	return openStack(path, h, opt, 0, 0)
}

// Resume continues the partial file of an interrupted CreateResumable run with the same
// path, header and options, after its first done pages, which end at byte size (what
// Sync returned). The file is cut back to size and the next WriteSlice writes page
// done where an uninterrupted run writes it: each page's IFD points to where the next
// page starts, so the pages already written stay valid, and the choice of BigTIFF
// follows from the header and options alone. The result is byte for byte the file an
// uninterrupted run writes.
func Resume(path string, h volume.Header, opt WriteOptions, done int, size int64) (*Writer, error) {
	if done < 0 || done > h.NZ {
		return nil, fmt.Errorf("%s: cannot resume after page %d of %d", path, done, h.NZ)
	}
	return openStack(path, h, opt, done, size)
}

func openStack(path string, h volume.Header, opt WriteOptions, done int, size int64) (*Writer, error) {
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	// The same decision as Create's.
	bound := uint64(16) + uint64(h.NZ)*enc.pageBound()
	enc.big = opt.BigTIFF || bound > math.MaxUint32
	var af *atomicfile.File
	if done == 0 {
		af, err = atomicfile.CreatePart(path, opt.Overwrite)
	} else {
		af, err = atomicfile.OpenPart(path, opt.Overwrite)
	}
	if err != nil {
		return nil, err
	}
	w := &Writer{af: af, bw: bufio.NewWriterSize(af, 1<<20), enc: enc, h: h}
	if done == 0 {
		if w.off, err = writeHeader(w.bw, enc.big); err != nil {
			af.Abort()
			return nil, fmt.Errorf("%s: %w", path, err)
		}
		return w, nil
	}
	// Check that the partial file starts as this run's file would.
	var want bytes.Buffer
	writeHeader(&want, enc.big)
	got := make([]byte, want.Len())
	if _, err := io.ReadFull(af.File, got); err != nil || !bytes.Equal(got, want.Bytes()) {
		af.Detach()
		return nil, fmt.Errorf("%s: the partial output %s does not start with this run's TIFF header", path, af.File.Name())
	}
	if size < int64(want.Len()) {
		af.Detach()
		return nil, fmt.Errorf("%s: cannot resume at byte %d, inside the header", path, size)
	}
	if err := af.ContinueAt(size); err != nil {
		af.Detach()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	w.z, w.off = done, uint64(size)
	return w, nil
}

// Sync makes every page written so far durable (it flushes the buffer and syncs the
// file) and returns how many pages that is and the length of the file, which Resume
// needs.
func (w *Writer) Sync() (slices int, size int64, err error) {
	if w.err != nil {
		return 0, 0, w.err
	}
	if w.done {
		return 0, 0, fmt.Errorf("%s: Sync after Close or Abort", w.af.Target())
	}
	if err := w.bw.Flush(); err != nil {
		w.err = fmt.Errorf("%s: %w", w.af.Target(), err)
		return 0, 0, w.err
	}
	if err := w.af.File.Sync(); err != nil {
		w.err = fmt.Errorf("%s: syncing: %w", w.af.Target(), err)
		return 0, 0, w.err
	}
	return w.z, int64(w.off), nil
}

// Suspend stops writing but keeps the partial file for Resume: it syncs what was
// written, closes the file and returns what Sync returns.
func (w *Writer) Suspend() (slices int, size int64, err error) {
	slices, size, err = w.Sync()
	w.done = true
	if derr := w.af.Detach(); err == nil && derr != nil {
		err = fmt.Errorf("%s: syncing: %w", w.af.Target(), derr)
	}
	return slices, size, err
}

// CreateFolderResumable is CreateFolder with a temporary folder of fixed name
// (atomicfile.PartName of dir), so that an interrupted run can be continued by
// ResumeFolder.
func CreateFolderResumable(dir string, h volume.Header, opt WriteOptions) (*FolderWriter, error) {
	return openFolder(dir, h, opt, 0)
}

// ResumeFolder continues the partial folder of an interrupted CreateFolderResumable run
// with the same folder, header and options: the first done slice files are kept (the
// Sync that reported them made them durable), any later file is removed, and the next
// WriteSlice writes slice done.
func ResumeFolder(dir string, h volume.Header, opt WriteOptions, done int) (*FolderWriter, error) {
	if done < 0 || done > h.NZ {
		return nil, fmt.Errorf("%s: cannot resume after slice %d of %d", dir, done, h.NZ)
	}
	return openFolder(dir, h, opt, done)
}

func openFolder(dir string, h volume.Header, opt WriteOptions, done int) (*FolderWriter, error) {
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", dir, err)
	}
	enc.big = opt.BigTIFF || 16+enc.pageBound() > math.MaxUint32 // as CreateFolder
	var d *atomicfile.Dir
	if done == 0 {
		d, err = atomicfile.CreatePartDir(dir, opt.Overwrite)
	} else {
		d, err = atomicfile.OpenPartDir(dir, opt.Overwrite)
	}
	if err != nil {
		return nil, err
	}
	fw := &FolderWriter{d: d, enc: enc, h: h, digits: folderDigits(h.NZ), bw: bufio.NewWriterSize(nil, 1<<20), z: done}
	if done == 0 {
		return fw, nil
	}
	ents, err := os.ReadDir(d.Path)
	if err != nil {
		d.Detach()
		return nil, err
	}
	keep := make(map[string]bool, done)
	for z := 0; z < done; z++ {
		keep[fw.SliceName(z)] = true
	}
	for _, e := range ents {
		if keep[e.Name()] {
			delete(keep, e.Name())
			continue
		}
		// A slice after the last durable one, or a file half written when the run
		// stopped: this run writes it again.
		if err := os.Remove(filepath.Join(d.Path, e.Name())); err != nil {
			d.Detach()
			return nil, err
		}
	}
	if len(keep) > 0 {
		d.Detach()
		return nil, fmt.Errorf("%s: the partial output %s lacks %d of its first %d slice files", dir, d.Path, len(keep), done)
	}
	return fw, nil
}

// folderDigits is the width of the slice numbers in a folder of nz slices, as
// CreateFolder names them.
func folderDigits(nz int) int {
	n, d := nz-1, 1
	for n >= 10 {
		n /= 10
		d++
	}
	return max(4, d)
}

// Sync makes every slice file written so far durable (the files not yet synced, then
// the folder that names them) and returns how many there are.
func (fw *FolderWriter) Sync() (slices int, size int64, err error) {
	if fw.err != nil {
		return 0, 0, fw.err
	}
	if fw.done {
		return 0, 0, errors.New(fw.d.Target() + ": Sync after Close or Abort")
	}
	if err := fw.syncPending(); err != nil {
		fw.err = fmt.Errorf("%s: %w", fw.d.Target(), err)
		return 0, 0, fw.err
	}
	if err := fw.d.Sync(); err != nil {
		return 0, 0, fmt.Errorf("%s: syncing: %w", fw.d.Target(), err)
	}
	return fw.z, 0, nil
}

// Suspend stops writing but keeps the partial folder for ResumeFolder.
func (fw *FolderWriter) Suspend() (slices int, size int64, err error) {
	slices, size, err = fw.Sync()
	fw.done = true
	if derr := fw.d.Detach(); err == nil && derr != nil {
		err = derr
	}
	return slices, size, err
}
