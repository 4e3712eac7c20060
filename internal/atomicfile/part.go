package atomicfile

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// PartSuffix ends the fixed temporary name of a resumable output. Create and CreateDir
// pick a random temporary name, which a later run cannot find; an output that may be
// continued after an interruption needs a name that follows from its target alone.
const PartSuffix = ".resumable"

// PartName is the fixed temporary name of target for a resumable output: the file or
// folder ".tripass-part-<name>.resumable" beside target.
func PartName(target string) string {
	target = filepath.Clean(target)
	return filepath.Join(filepath.Dir(target), TempPrefix+filepath.Base(target)+PartSuffix)
}

// ErrNoPart is returned by OpenPart and OpenPartDir when there is no partial output to
// continue.
var ErrNoPart = errors.New("no partial output to continue")

// CreatePart is Create with the fixed temporary name PartName(target). A partial
// output left there by an earlier run is discarded: the file is truncated.
func CreatePart(target string, overwrite bool) (*File, error) {
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	f, err := os.OpenFile(PartName(target), os.O_RDWR|os.O_CREATE|os.O_TRUNC, 0o666)
	if err != nil {
		return nil, err
	}
	return &File{File: f, target: target}, nil
}

// OpenPart opens the partial output that an earlier CreatePart left at
// PartName(target), for reading and writing, to continue it. The file position is at
// the start; the caller truncates and seeks.
func OpenPart(target string, overwrite bool) (*File, error) {
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	f, err := os.OpenFile(PartName(target), os.O_RDWR, 0)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("%s: %w", PartName(target), ErrNoPart)
	}
	if err != nil {
		return nil, err
	}
	return &File{File: f, target: target}, nil
}

// Detach syncs and closes the temporary file but keeps it under its temporary name, so
// that a later run can continue it (after Detach, Commit and Abort do nothing useful:
// the File is done).
func (f *File) Detach() error {
	if f.done {
		return errors.New("atomicfile: detach after commit or abort")
	}
	f.done = true
	if err := f.File.Sync(); err != nil {
		f.File.Close()
		return err
	}
	return f.File.Close()
}

// CreatePartDir is CreateDir with the fixed temporary name PartName(target). A partial
// folder left there by an earlier run is removed first.
func CreatePartDir(target string, overwrite bool) (*Dir, error) {
	target = filepath.Clean(target)
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	p := PartName(target)
	if err := os.RemoveAll(p); err != nil {
		return nil, err
	}
	if err := os.Mkdir(p, 0o777); err != nil {
		return nil, err
	}
	return &Dir{Path: p, target: target}, nil
}

// OpenPartDir returns the partial folder that an earlier CreatePartDir left at
// PartName(target), to continue filling it.
func OpenPartDir(target string, overwrite bool) (*Dir, error) {
	target = filepath.Clean(target)
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	p := PartName(target)
	st, err := os.Stat(p)
	if errors.Is(err, os.ErrNotExist) {
		return nil, fmt.Errorf("%s: %w", p, ErrNoPart)
	}
	if err != nil {
		return nil, err
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("%s: the partial output is not a folder", p)
	}
	return &Dir{Path: p, target: target}, nil
}

// Sync makes the names of the files written into the temporary folder so far durable.
func (d *Dir) Sync() error {
	f, err := os.Open(d.Path)
	if err != nil {
		return err
	}
	serr := f.Sync()
	cerr := f.Close()
	if serr != nil && !errors.Is(serr, os.ErrInvalid) {
		return serr
	}
	return cerr
}

// Detach keeps the temporary folder for a later run to continue (see File.Detach).
func (d *Dir) Detach() error {
	if d.done {
		return errors.New("atomicfile: detach after commit or abort")
	}
	d.done = true
	return d.Sync()
}

// WriteFileAtomic replaces the file at path with data in one step: it writes a
// temporary file beside it, syncs it, renames it over path and syncs the folder. A
// reader (or a run after a crash) sees either the old content or the new, never a mix.
func WriteFileAtomic(path string, data []byte) error {
	tmp := path + ".tmp"
	f, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o666)
	if err != nil {
		return err
	}
	if _, err := f.Write(data); err != nil {
		f.Close()
		os.Remove(tmp)
		return err
	}
	if err := SyncFile(f); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return err
	}
	syncDir(filepath.Dir(path))
	return nil
}

// ErrShortPart is returned by ContinueAt when the partial file holds less than the
// caller recorded as written.
var ErrShortPart = errors.New("the partial output is shorter than recorded")

// ContinueAt truncates the temporary file to size bytes and moves the write position
// there, dropping whatever an interrupted run wrote after its last durable point. It
// fails with ErrShortPart if the file holds fewer than size bytes.
func (f *File) ContinueAt(size int64) error {
	st, err := f.File.Stat()
	if err != nil {
		return err
	}
	if st.Size() < size {
		return fmt.Errorf("%s: %w: %d bytes, want at least %d", f.File.Name(), ErrShortPart, st.Size(), size)
	}
	if err := f.File.Truncate(size); err != nil {
		return err
	}
	_, err = f.File.Seek(size, 0)
	return err
}
