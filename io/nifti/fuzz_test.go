package nifti

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tripass/tripass/volume"
)

type memFile struct{ *bytes.Reader }

func (memFile) Close() error { return nil }

// FuzzOpen opens arbitrary bytes as a NIfTI-1 file (as Open, or as OpenVolume when
// vol ≥ 0), gzip-compressed first when
// compress is set (so that mutated headers reach the .nii.gz path too; the bytes
// may also be gzip already), and reads every slice and a few seeks. Nothing may panic; every refusal must be a *FormatError or an
// *UnsupportedError (the input is in memory, so no other failure is possible); an
// accepted uncompressed file must hold the data its header claims; and the work is
// bounded by the input's size, which the allocation and deflate bounds guarantee.
// Seeds: every fixture nibabel wrote (testdata), and testdata/fuzz/FuzzOpen.
func FuzzOpen(f *testing.F) {
	for _, e := range readManifest(f, "testdata") {
		b, err := os.ReadFile(filepath.Join("testdata", e.File))
		if err != nil {
			f.Fatal(err)
		}
		f.Add(b, false, int8(-1))
		if !strings.HasSuffix(e.File, ".gz") {
			f.Add(b, true, int8(-1))
		}
		if e.Volumes > 1 {
			f.Add(b, false, int8(e.Volumes-1))
		}
	}
	f.Add([]byte{}, false, int8(-1))
	f.Add(make([]byte, headerSize), true, int8(0))
	f.Fuzz(func(t *testing.T, data []byte, compress bool, vol int8) {
		if compress {
			data = gzipped(data)
		}
		r, err := newReader("fuzz.nii", memFile{bytes.NewReader(data)}, int64(len(data)), int(vol)) // vol < 0: as Open
		if err != nil {
			checkTyped(t, err)
			return
		}
		h := r.Header()
		if !r.Compressed() && r.p.fileBytes() > int64(len(data)) {
			t.Fatalf("accepted data to byte %d from %d", r.p.fileBytes(), len(data))
		}
		s := new(volume.Slice)
		for z := 0; ; z++ {
			err := r.ReadSlice(s)
			if err == io.EOF {
				if z != h.NZ {
					t.Fatalf("io.EOF after %d of %d slices", z, h.NZ)
				}
				break
			}
			if err != nil {
				checkTyped(t, err)
				break
			}
			if s.NX != h.NX || s.NY != h.NY || s.Type != h.Type {
				t.Fatalf("slice %d is %d×%d %v, header %+v", z, s.NX, s.NY, s.Type, h)
			}
		}
		for _, z := range []int{h.NZ / 2, 0, h.NZ} {
			if err := r.SeekSlice(z); err != nil {
				checkTyped(t, err)
				continue
			}
			if err := r.ReadSlice(s); err != nil && err != io.EOF {
				checkTyped(t, err)
			}
		}
	})
}

func checkTyped(t *testing.T, err error) {
	t.Helper()
	var fe *FormatError
	var ue *UnsupportedError
	if !errors.As(err, &fe) && !errors.As(err, &ue) {
		t.Fatalf("untyped error %T: %v", err, err)
	}
}
