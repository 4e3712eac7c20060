package nifti

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// testVolume makes a volume of type t with pseudo-random values over the type's range
// (fixed seed), its extremes in the first voxels.
func testVolume(h volume.Header, seed uint64) []*volume.Slice {
	rng := rand.New(rand.NewPCG(seed, 3))
	lo, hi := h.Type.Range()
	var out []*volume.Slice
	for z := 0; z < h.NZ; z++ {
		s := volume.NewSlice(h.NX, h.NY, h.Type)
		for i := 0; i < s.Len(); i++ {
			var v float64
			switch {
			case h.Type.IsFloat():
				v = rng.NormFloat64() * 1e4
			case z == 0 && i == 0:
				v = lo
			case z == 0 && i == 1:
				v = hi
			default:
				v = math.Min(math.Floor(lo+rng.Float64()*(hi-lo+1)), hi)
			}
			s.Set(i, v)
		}
		out = append(out, s)
	}
	return out
}

func writeVolume(t testing.TB, path string, h volume.Header, opt WriteOptions, slices []*volume.Slice) {
	t.Helper()
	w, err := Create(path, h, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range slices {
		if err := w.WriteSlice(s); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
}

// fixtureOrientation is the placement of a nibabel fixture with a rotated qform and a
// different sheared sform.
func fixtureOrientation(t testing.TB) Orientation {
	r, err := Open(filepath.Join("testdata", "uint8_mm.nii"))
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	return r.Orientation()
}

// TestWriteReadBack writes every sample type to .nii and .nii.gz, with and without a
// carried orientation, and reads it back exactly (reader and writer agree; the header
// layout test and the nibabel tests tie both to the standard and to nibabel).
func TestWriteReadBack(t *testing.T) {
	dir := t.TempDir()
	carried := fixtureOrientation(t)
	for _, typ := range volume.SampleTypes {
		for _, ext := range []string{".nii", ".nii.gz"} {
			for _, orient := range []*Orientation{nil, &carried} {
				name := fmt.Sprintf("%v%s/orient=%v", typ, ext, orient != nil)
				t.Run(name, func(t *testing.T) {
					h := volume.Header{NX: 13, NY: 6, NZ: 4, Type: typ, Spacing: [3]float64{0.65, 0.65, 2}, Unit: "um"}
					src := testVolume(h, uint64(typ))
					path := filepath.Join(dir, fmt.Sprintf("%v-%v%s", typ, orient != nil, ext))
					writeVolume(t, path, h, WriteOptions{Orientation: orient, Description: "rock core " + typ.String()}, src)
					r, err := Open(path)
					if err != nil {
						t.Fatal(err)
					}
					defer r.Close()
					want := h
					for i := range want.Spacing {
						want.Spacing[i] = float64(float32(h.Spacing[i])) // pixdim is float32
					}
					if r.Header() != want {
						t.Errorf("header %+v, want %+v", r.Header(), want)
					}
					wantO := PlainOrientation(h)
					if orient != nil {
						wantO = *orient
					}
					if r.Orientation() != wantO {
						t.Errorf("orientation %+v, want %+v", r.Orientation(), wantO)
					}
					if r.Description() != "rock core "+typ.String() {
						t.Errorf("description %q", r.Description())
					}
					if r.Compressed() != (ext == ".nii.gz") {
						t.Errorf("Compressed = %v", r.Compressed())
					}
					if _, _, applied := r.Scaling(); applied {
						t.Error("scaling applied to an unscaled file")
					}
					s := new(volume.Slice)
					for z := range src {
						if err := r.ReadSlice(s); err != nil {
							t.Fatal(err)
						}
						if !bytes.Equal(s.Data, src[z].Data) {
							t.Fatalf("slice %d differs", z)
						}
					}
					if err := r.ReadSlice(s); err != io.EOF {
						t.Errorf("after the last slice: %v", err)
					}
				})
			}
		}
	}
}

// TestWrittenHeaderLayout checks the header bytes tripass writes at the offsets of
// nifti1.h (as listed by nibabel.nifti1.header_dtype, nibabel 5.0).
func TestWrittenHeaderLayout(t *testing.T) {
	path := filepath.Join(t.TempDir(), "layout.nii")
	h := volume.Header{NX: 5, NY: 4, NZ: 3, Type: volume.Int16, Spacing: [3]float64{0.5, 0.25, 2}, Unit: "mm"}
	writeVolume(t, path, h, WriteOptions{Description: "layout"}, testVolume(h, 1))
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	le := binary.LittleEndian
	f32 := func(off int) float32 { return math.Float32frombits(le.Uint32(b[off:])) }
	checks := []struct {
		name      string
		got, want any
	}{
		{"sizeof_hdr@0", le.Uint32(b[0:]), uint32(348)},
		{"dim@40", [4]uint16{le.Uint16(b[40:]), le.Uint16(b[42:]), le.Uint16(b[44:]), le.Uint16(b[46:])}, [4]uint16{3, 5, 4, 3}},
		{"datatype@70", le.Uint16(b[70:]), uint16(4)},
		{"bitpix@72", le.Uint16(b[72:]), uint16(16)},
		{"pixdim@76", [4]float32{f32(76), f32(80), f32(84), f32(88)}, [4]float32{1, 0.5, 0.25, 2}},
		{"vox_offset@108", f32(108), float32(352)},
		{"scl_slope@112", f32(112), float32(1)},
		{"scl_inter@116", f32(116), float32(0)},
		{"xyzt_units@123 (mm)", b[123], uint8(2)},
		{"descrip@148", string(b[148:154]), "layout"},
		{"qform_code@252", le.Uint16(b[252:]), uint16(1)},
		{"sform_code@254", le.Uint16(b[254:]), uint16(1)},
		{"srow_x@280", [4]float32{f32(280), f32(284), f32(288), f32(292)}, [4]float32{0.5, 0, 0, 0}},
		{"srow_y@296", [4]float32{f32(296), f32(300), f32(304), f32(308)}, [4]float32{0, 0.25, 0, 0}},
		{"srow_z@312", [4]float32{f32(312), f32(316), f32(320), f32(324)}, [4]float32{0, 0, 2, 0}},
		{"magic@344", string(b[344:348]), "n+1\x00"},
		{"extension flag@348", le.Uint32(b[348:]), uint32(0)},
		{"file size", len(b), 352 + 5*4*3*2},
	}
	for _, c := range checks {
		if c.got != c.want {
			t.Errorf("%s: %v, want %v", c.name, c.got, c.want)
		}
	}
}

// TestWriteUnits checks how spacing units are written: NIfTI-1 names m, mm and µm
// (nifti1.h NIFTI_UNITS_*), so nm is written as µm and cm as mm; no unit is unknown,
// with orientation codes 0.
func TestWriteUnits(t *testing.T) {
	dir := t.TempDir()
	cases := []struct {
		unit     string
		spacing  [3]float64
		wantUnit string
		wantSp   [3]float64
		wantCode int16
	}{
		{"nm", [3]float64{100, 100, 250}, "um", [3]float64{0.1, 0.1, 0.25}, 1},
		{"cm", [3]float64{0.1, 0.1, 0.2}, "mm", [3]float64{1, 1, 2}, 1},
		{"m", [3]float64{1e-4, 1e-4, 2e-4}, "m", [3]float64{1e-4, 1e-4, 2e-4}, 1},
		{"", [3]float64{1, 1, 3}, "", [3]float64{1, 1, 3}, 0},
		{"", [3]float64{0, 0, 0}, "", [3]float64{1, 1, 1}, 0}, // unknown spacing: 1 voxel
	}
	for i, c := range cases {
		path := filepath.Join(dir, fmt.Sprintf("u%d.nii", i))
		h := volume.Header{NX: 3, NY: 2, NZ: 2, Type: volume.Uint8, Spacing: c.spacing, Unit: c.unit}
		writeVolume(t, path, h, WriteOptions{}, testVolume(h, 2))
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		got := r.Header()
		for k := range c.wantSp {
			if float32(got.Spacing[k]) != float32(c.wantSp[k]) {
				t.Errorf("%q %v: spacing %v, want %v", c.unit, c.spacing, got.Spacing, c.wantSp)
				break
			}
		}
		if got.Unit != c.wantUnit || r.Orientation().QformCode != c.wantCode || r.Orientation().SformCode != c.wantCode {
			t.Errorf("%q: unit %q codes %d/%d, want %q and %d", c.unit, got.Unit, r.Orientation().QformCode, r.Orientation().SformCode, c.wantUnit, c.wantCode)
		}
		if a := r.Orientation().Affine(got.Spacing); a[0][0] != got.Spacing[0] || a[2][2] != got.Spacing[2] || a[0][3] != 0 {
			t.Errorf("%q: affine %v is not the plain scaling", c.unit, a)
		}
		r.Close()
	}
}

// TestDescriptionIsCut: descrip is char[80] (nifti1.h); 79 bytes of text keep the NUL
// that C readers expect, cut at a UTF-8 character boundary.
func TestDescriptionIsCut(t *testing.T) {
	long := strings.Repeat("é", 60) // 120 bytes
	got := descripField(long)
	if len(got) > 79 || !strings.HasPrefix(long, got) || len(got) != 78 {
		t.Errorf("cut to %d bytes: %q", len(got), got)
	}
	if got := descripField("a\x00b"); got != "a" {
		t.Errorf("NUL not cut: %q", got)
	}
}

// TestWriterAtomic: nothing under the target's name unless Close succeeds after every
// slice, no temporary left behind, an existing file kept without Overwrite.
// expected: the promise of issues 2 and 5 (atomic outputs), checked on the folder.
func TestWriterAtomic(t *testing.T) {
	h := volume.Header{NX: 8, NY: 5, NZ: 4, Type: volume.Float32, Spacing: [3]float64{1, 1, 1}, Unit: "mm"}
	src := testVolume(h, 4)
	for _, ext := range []string{".nii", ".nii.gz"} {
		for _, abort := range []bool{false, true} {
			dir := t.TempDir()
			path := filepath.Join(dir, "out"+ext)
			w, err := Create(path, h, WriteOptions{})
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range src[:3] {
				if err := w.WriteSlice(s); err != nil {
					t.Fatal(err)
				}
			}
			if abort {
				err = w.Abort()
			} else {
				err = w.Close()
				if !errors.Is(err, volume.ErrShortVolume) || !strings.Contains(err.Error(), path) {
					t.Errorf("%s: Close = %v, want ErrShortVolume naming the file", ext, err)
				}
				err = w.Abort()
			}
			if err != nil {
				t.Errorf("Abort = %v", err)
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("%s abort=%v: left behind %v", ext, abort, ents)
			}
		}
	}

	dir := t.TempDir()
	path := filepath.Join(dir, "old.nii")
	os.WriteFile(path, []byte("old"), 0o644)
	if _, err := Create(path, h, WriteOptions{}); !errors.Is(err, atomicfile.ErrExists) {
		t.Errorf("Create over an existing file = %v, want ErrExists", err)
	}
	writeVolume(t, path, h, WriteOptions{Overwrite: true}, src)
	if r, err := Open(path); err != nil {
		t.Errorf("after overwrite: %v", err)
	} else {
		r.Close()
	}
}

// TestCreateRefuses: names that are not .nii/.nii.gz, sizes beyond NIfTI-1's int16
// dim fields (nifti1.h), invalid headers and spacings beyond float32 pixdim.
func TestCreateRefuses(t *testing.T) {
	dir := t.TempDir()
	ok := volume.Header{NX: 4, NY: 4, NZ: 4, Type: volume.Uint16}
	cases := []struct {
		name string
		path string
		h    volume.Header
		want string
	}{
		{"extension", "vol.img", ok, "must end in .nii or .nii.gz"},
		{"too wide for int16 dims", "wide.nii", volume.Header{NX: 40000, NY: 2, NZ: 2, Type: volume.Uint8}, "at most 32767"},
		{"invalid header", "bad.nii", volume.Header{NX: 0, NY: 4, NZ: 4, Type: volume.Uint8}, "out of range"},
		{"spacing beyond float32", "far.nii", volume.Header{NX: 2, NY: 2, NZ: 2, Type: volume.Uint8, Spacing: [3]float64{1e300, 1, 1}, Unit: "mm"}, "beyond NIfTI-1's float32"},
	}
	for _, c := range cases {
		path := filepath.Join(dir, c.path)
		if _, err := Create(path, c.h, WriteOptions{}); err == nil || !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "nifti: ") {
			t.Errorf("%s: %v, want an error containing %q", c.name, err, c.want)
		}
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("left behind %v", ents)
	}
	// A slice of the wrong shape or type is refused.
	w, err := Create(filepath.Join(dir, "ok.nii.gz"), ok, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Abort()
	if err := w.WriteSlice(volume.NewSlice(4, 4, volume.Int16)); err == nil {
		t.Error("an int16 slice was accepted by a uint16 volume")
	}
	if err := w.WriteSlice(volume.NewSlice(4, 5, volume.Uint16)); err == nil {
		t.Error("a taller slice was accepted")
	}
}

// TestGzipOutputIsStandard checks that a .nii.gz is a plain gzip stream: the standard
// library's compress/gzip (RFC 1952) decompresses it to the bytes of the .nii.
func TestGzipOutputIsStandard(t *testing.T) {
	dir := t.TempDir()
	h := volume.Header{NX: 64, NY: 64, NZ: 40, Type: volume.Uint16, Spacing: [3]float64{1, 1, 1}, Unit: "mm"}
	src := testVolume(h, 9)
	writeVolume(t, filepath.Join(dir, "a.nii"), h, WriteOptions{}, src)
	writeVolume(t, filepath.Join(dir, "a.nii.gz"), h, WriteOptions{}, src)
	plain, _ := os.ReadFile(filepath.Join(dir, "a.nii"))
	f, _ := os.Open(filepath.Join(dir, "a.nii.gz"))
	defer f.Close()
	zr, err := gzip.NewReader(f)
	if err != nil {
		t.Fatal(err)
	}
	unz, err := io.ReadAll(zr)
	if err != nil || !bytes.Equal(unz, plain) {
		t.Fatalf("gunzip of the .nii.gz differs from the .nii (err %v)", err)
	}
}

// TestMemoryDoesNotGrowWithDepth reads and writes a shallow and a deep .nii.gz and
// checks that the bytes allocated do not grow with the number of slices (the gzip
// stream is never held whole).
func TestMemoryDoesNotGrowWithDepth(t *testing.T) {
	dir := t.TempDir()
	alloc := func(nz int) uint64 {
		h := volume.Header{NX: 128, NY: 128, NZ: nz, Type: volume.Float32, Spacing: [3]float64{1, 1, 1}, Unit: "mm"}
		s := testVolume(volume.Header{NX: 128, NY: 128, NZ: 1, Type: volume.Float32}, 5)[0]
		path := filepath.Join(dir, fmt.Sprintf("d%d.nii.gz", nz))
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		w, err := Create(path, h, WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		for z := 0; z < nz; z++ {
			if err := w.WriteSlice(s); err != nil {
				t.Fatal(err)
			}
		}
		if err := w.Close(); err != nil {
			t.Fatal(err)
		}
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		for {
			if err := r.ReadSlice(s); err == io.EOF {
				break
			} else if err != nil {
				t.Fatal(err)
			}
		}
		r.Close()
		runtime.ReadMemStats(&after)
		return after.TotalAlloc - before.TotalAlloc
	}
	// Both depths fill every buffer of the writer's compression pipeline
	// (2·GOMAXPROCS+1 chunks of 512 KiB); the deeper one has four times the data.
	shallow, deep := alloc(100), alloc(400) // 6.25 MiB and 25 MiB of data
	t.Logf("allocated %d bytes for 100 slices, %d for 400", shallow, deep)
	if deep > shallow+shallow/2 {
		t.Errorf("allocation grows with depth: %d bytes for 100 slices, %d for 400", shallow, deep)
	}
}
