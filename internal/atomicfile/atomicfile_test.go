package atomicfile

import (
	"errors"
	"os"
	"path/filepath"
	"testing"
)

func TestFileAppearsOnlyOnCommit(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "out.tif")
	f, err := Create(target, false)
	if err != nil {
		t.Fatal(err)
	}
	f.WriteString("data")
	if _, err := os.Stat(target); !errors.Is(err, os.ErrNotExist) {
		t.Fatalf("target exists before commit: %v", err)
	}
	if err := f.Commit(); err != nil {
		t.Fatal(err)
	}
	if b, _ := os.ReadFile(target); string(b) != "data" {
		t.Fatalf("target holds %q", b)
	}
	if _, err := Create(target, false); !errors.Is(err, ErrExists) {
		t.Errorf("second create: %v, want ErrExists", err)
	}
	left, _ := filepath.Glob(filepath.Join(dir, TempPrefix+"*"))
	if len(left) != 0 {
		t.Errorf("temporary files left: %v", left)
	}
}

func TestAbortLeavesNothing(t *testing.T) {
	dir := t.TempDir()
	f, err := Create(filepath.Join(dir, "a.raw"), false)
	if err != nil {
		t.Fatal(err)
	}
	f.Abort()
	d, err := CreateDir(filepath.Join(dir, "slices"), false)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(d.Path, "z0.tif"), []byte("x"), 0o644)
	d.Abort()
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("left behind: %v", ents)
	}
}

func TestDirCommitReplacesWithOverwrite(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "slices")
	os.Mkdir(target, 0o755)
	os.WriteFile(filepath.Join(target, "old.tif"), []byte("x"), 0o644)
	if _, err := CreateDir(target, false); !errors.Is(err, ErrExists) {
		t.Fatalf("CreateDir over existing folder: %v, want ErrExists", err)
	}
	d, err := CreateDir(target, true)
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(d.Path, "new.tif"), []byte("y"), 0o644)
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(target, "new.tif")); err != nil {
		t.Error("new file missing after commit")
	}
	if _, err := os.Stat(filepath.Join(target, "old.tif")); err == nil {
		t.Error("old folder's file survived the replacement")
	}
}

func TestEmptyFolderIsNoObstacle(t *testing.T) {
	target := filepath.Join(t.TempDir(), "slices")
	os.Mkdir(target, 0o755)
	d, err := CreateDir(target, false)
	if err != nil {
		t.Fatalf("an empty existing folder was refused: %v", err)
	}
	os.WriteFile(filepath.Join(d.Path, "z0.tif"), []byte("x"), 0o644)
	if err := d.Commit(); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(target, "z0.tif")); err != nil {
		t.Error(err)
	}
}

func TestOutputsGetOrdinaryModes(t *testing.T) {
	dir := t.TempDir()
	f, err := Create(filepath.Join(dir, "a.tif"), false)
	if err != nil {
		t.Fatal(err)
	}
	f.Commit()
	d, err := CreateDir(filepath.Join(dir, "s"), false)
	if err != nil {
		t.Fatal(err)
	}
	d.Commit()
	u := os.FileMode(processUmask())
	// expected: 0666 and 0777 less the umask, as open(2) and mkdir(2) give (POSIX).
	if st, _ := os.Stat(filepath.Join(dir, "a.tif")); st.Mode().Perm() != 0o666&^u {
		t.Errorf("file mode %v, want %v", st.Mode().Perm(), 0o666&^u)
	}
	if st, _ := os.Stat(filepath.Join(dir, "s")); st.Mode().Perm() != 0o777&^u {
		t.Errorf("folder mode %v, want %v", st.Mode().Perm(), 0o777&^u)
	}
}
