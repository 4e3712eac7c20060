// Package atomicfile writes a file or a folder under a temporary name beside its
// target and moves it to the final name only when it is complete and synced, so that a
// failed or killed run never leaves something under the final name that looks finished.
package atomicfile

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// ErrExists is returned when the target exists and overwriting was not allowed.
var ErrExists = errors.New("output already exists (use --overwrite to replace it)")

// TempPrefix starts the name of every temporary output, so they are easy to spot and
// clean up: ".tripass-part-<name>-<random>".
const TempPrefix = ".tripass-part-"

// A File is an output file being written under a temporary name.
type File struct {
	*os.File
	target string
	done   bool
}

// Create opens a new temporary file in the folder of target. If target exists and
// overwrite is false it fails with ErrExists.
func Create(target string, overwrite bool) (*File, error) {
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	f, err := os.CreateTemp(filepath.Dir(target), TempPrefix+filepath.Base(target)+"-*")
	if err != nil {
		return nil, err
	}
	// CreateTemp makes the file private (0600); an output gets the mode an ordinary
	// new file would have.
	if err := f.Chmod(os.FileMode(0o666 &^ processUmask())); err != nil {
		f.Close()
		os.Remove(f.Name())
		return nil, err
	}
	return &File{File: f, target: target}, nil
}

// Target is the final name of the file.
func (f *File) Target() string { return f.target }

// Commit syncs and closes the file and renames it to its target.
func (f *File) Commit() error {
	if f.done {
		return errors.New("atomicfile: commit after commit or abort")
	}
	f.done = true
	tmp := f.File.Name()
	if err := f.File.Sync(); err != nil {
		f.File.Close()
		os.Remove(tmp)
		return err
	}
	if err := f.File.Close(); err != nil {
		os.Remove(tmp)
		return err
	}
	if err := os.Rename(tmp, f.target); err != nil {
		os.Remove(tmp)
		return err
	}
	syncDir(filepath.Dir(f.target))
	return nil
}

// Abort closes and removes the temporary file. It is safe to call more than once and
// after Commit (then it does nothing).
func (f *File) Abort() error {
	if f.done {
		return nil
	}
	f.done = true
	f.File.Close()
	return os.Remove(f.File.Name())
}

// A Dir is an output folder being filled under a temporary name.
type Dir struct {
	Path   string // the temporary folder; write files into it
	target string
	done   bool
}

// CreateDir makes a temporary folder beside target. If target exists and overwrite is
// false it fails with ErrExists; with overwrite, an existing target is replaced on Commit.
func CreateDir(target string, overwrite bool) (*Dir, error) {
	target = filepath.Clean(target)
	if err := checkTarget(target, overwrite); err != nil {
		return nil, err
	}
	p, err := os.MkdirTemp(filepath.Dir(target), TempPrefix+filepath.Base(target)+"-*")
	if err != nil {
		return nil, err
	}
	if err := os.Chmod(p, os.FileMode(0o777&^processUmask())); err != nil {
		os.Remove(p)
		return nil, err
	}
	return &Dir{Path: p, target: target}, nil
}

// Target is the final name of the folder.
func (d *Dir) Target() string { return d.target }

// Commit syncs the folder and renames it to its target, replacing an existing one.
func (d *Dir) Commit() error {
	if d.done {
		return errors.New("atomicfile: commit after commit or abort")
	}
	d.done = true
	syncDir(d.Path)
	if st, err := os.Lstat(d.target); err == nil {
		if !st.IsDir() {
			os.RemoveAll(d.Path)
			return fmt.Errorf("%s exists and is not a folder", d.target)
		}
		// Move the old folder aside first so that the new one appears in one rename.
		old := d.Path + ".old"
		if err := os.Rename(d.target, old); err != nil {
			os.RemoveAll(d.Path)
			return err
		}
		if err := os.Rename(d.Path, d.target); err != nil {
			os.Rename(old, d.target)
			os.RemoveAll(d.Path)
			return err
		}
		os.RemoveAll(old)
	} else if err := os.Rename(d.Path, d.target); err != nil {
		os.RemoveAll(d.Path)
		return err
	}
	syncDir(filepath.Dir(d.target))
	return nil
}

// Abort removes the temporary folder and everything in it.
func (d *Dir) Abort() error {
	if d.done {
		return nil
	}
	d.done = true
	return os.RemoveAll(d.Path)
}

func checkTarget(target string, overwrite bool) error {
	st, err := os.Lstat(target)
	if err == nil && st.IsDir() && isEmptyDir(target) {
		return nil // a folder made ready for the output holds nothing to lose
	}
	switch {
	case err == nil && !overwrite:
		return fmt.Errorf("%s: %w", target, ErrExists)
	case err == nil && st.IsDir() && !overwrite:
		return fmt.Errorf("%s: %w", target, ErrExists)
	case err != nil && !errors.Is(err, os.ErrNotExist):
		return err
	}
	return nil
}

func isEmptyDir(p string) bool {
	d, err := os.Open(p)
	if err != nil {
		return false
	}
	defer d.Close()
	names, err := d.Readdirnames(1)
	return err != nil && len(names) == 0
}

// SyncFile syncs and closes a file written inside a temporary folder.
func SyncFile(f *os.File) error {
	if err := f.Sync(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

func syncDir(dir string) {
	if d, err := os.Open(dir); err == nil {
		d.Sync() // best effort: some file systems refuse to sync a folder
		d.Close()
	}
}
