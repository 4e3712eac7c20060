package nifti

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/tripass/tripass/volume"
)

// mutation changes a valid NIfTI-1 file (uncompressed bytes) into a bad one.
type mutation func(b []byte) []byte

func set16(off int, v int16) mutation {
	return func(b []byte) []byte { binary.LittleEndian.PutUint16(b[off:], uint16(v)); return b }
}

func set32(off int, v int32) mutation {
	return func(b []byte) []byte { binary.LittleEndian.PutUint32(b[off:], uint32(v)); return b }
}

func setf(off int, v float32) mutation {
	return func(b []byte) []byte { binary.LittleEndian.PutUint32(b[off:], math.Float32bits(v)); return b }
}

func setBytes(off int, v string) mutation {
	return func(b []byte) []byte { copy(b[off:], v); return b }
}

func cut(n int) mutation { return func(b []byte) []byte { return b[:n] } }

func all(ms ...mutation) mutation {
	return func(b []byte) []byte {
		for _, m := range ms {
			b = m(b)
		}
		return b
	}
}

// gzipWriters reuses compressors: the fuzz target compresses every input.
var gzipWriters = sync.Pool{New: func() any { zw, _ := gzip.NewWriterLevel(nil, gzip.BestSpeed); return zw }}

// gzipped compresses b with the standard library's compress/gzip.
func gzipped(b []byte) []byte {
	var buf bytes.Buffer
	zw := gzipWriters.Get().(*gzip.Writer)
	zw.Reset(&buf)
	zw.Write(b)
	zw.Close()
	gzipWriters.Put(zw)
	return buf.Bytes()
}

// openAndRead opens path and reads every slice, returning the first error.
func openAndRead(path string) error {
	r, err := Open(path)
	if err != nil {
		return err
	}
	defer r.Close()
	s := new(volume.Slice)
	for {
		if err := r.ReadSlice(s); err == io.EOF {
			return nil
		} else if err != nil {
			return err
		}
	}
}

// TestBadInput builds malformed files from a valid nibabel-written one and checks each
// is refused with a one-line error that starts with "nifti: ", names the file and the
// problem, is typed, comes within a second and allocates nothing in proportion to what
// the header claims. Field offsets: nifti1.h (as nibabel.nifti1.header_dtype lists
// them, nibabel 5.0).
func TestBadInput(t *testing.T) {
	valid, err := os.ReadFile(filepath.Join("testdata", "uint8_mm.nii")) // 11×7×5 uint8, little-endian
	if err != nil {
		t.Fatal(err)
	}
	validBE, err := os.ReadFile(filepath.Join("testdata", "int16_be_mm.nii"))
	if err != nil {
		t.Fatal(err)
	}
	const (
		unsupported = "unsupported"
		format      = "format"
	)
	cases := []struct {
		name string
		base []byte // nil: valid
		m    mutation
		gz   bool                // compress the mutated bytes
		post func([]byte) []byte // applied after compression
		kind string              // "format" or "unsupported"
		want string
	}{
		{name: "empty file", m: cut(0), kind: format, want: "header truncated"},
		{name: "one byte", m: cut(1), kind: format, want: "header truncated"},
		{name: "truncated header", m: cut(200), kind: format, want: "header truncated: 200 of 348"},
		{name: "wrong sizeof_hdr", m: set32(0, 1234), kind: format, want: "sizeof_hdr is 1234, want 348"},
		{name: "NIfTI-2", m: set32(0, 540), kind: unsupported, want: "NIfTI-2"},
		{name: "Analyze magic", m: setBytes(344, "\x00\x00\x00\x00"), kind: format, want: "no NIfTI-1 magic"},
		{name: "two-file magic", m: setBytes(344, "ni1\x00"), kind: unsupported, want: ".hdr"},
		{name: "dim[0] zero", m: set16(40, 0), kind: format, want: "dim[0] is 0"},
		{name: "dim[0] eight", m: set16(40, 8), kind: format, want: "dim[0] is 8"},
		{name: "negative dim", m: set16(44, -7), kind: format, want: "dim[2] is negative (-7)"},
		{name: "zero dim", m: set16(46, 0), kind: format, want: "dim[3] is 0"},
		{name: "4D series", m: all(set16(40, 4), set16(48, 3)), kind: unsupported,
			want: "4D NIfTI (3 volumes) not supported: tripass filters 3D volumes; split the series first"},
		{name: "5D vectors", m: all(set16(40, 5), set16(48, 1), set16(50, 3)), kind: unsupported, want: "5D NIfTI"},
		{name: "unknown datatype", m: set16(70, 99), kind: format, want: "unknown datatype 99"},
		{name: "complex datatype", m: all(set16(70, 32), set16(72, 64)), kind: unsupported, want: "complex64"},
		{name: "RGB datatype", m: all(set16(70, 128), set16(72, 24)), kind: unsupported, want: "RGB24"},
		{name: "int64 datatype", m: all(set16(70, 1024), set16(72, 64)), kind: unsupported, want: "int64"},
		{name: "bitpix mismatch", m: set16(72, 16), kind: format, want: "bitpix is 16, but datatype uint8 has 8"},
		{name: "bitpix mismatch big-endian", base: validBE, m: func(b []byte) []byte { binary.BigEndian.PutUint16(b[72:], 8); return b },
			kind: format, want: "bitpix is 8, but datatype int16 has 16"},
		{name: "2^40 voxels", m: all(set16(42, 16384), set16(44, 8192), set16(46, 8192)), kind: format,
			want: "places 1099511627776 bytes of uint8 data"},
		{name: "beyond 2^40 voxels", m: all(set16(70, 64), set16(72, 64), set16(42, 32767), set16(44, 32767), set16(46, 32767)), kind: format,
			want: "exceeds 2^40"},
		{name: "vox_offset past the end", m: setf(108, 1e6), kind: format, want: "at vox_offset 1000000"},
		{name: "vox_offset huge", m: setf(108, 3e38), kind: format, want: "vox_offset 3e+38 is beyond any file"},
		{name: "vox_offset inside header", m: setf(108, 100), kind: format, want: "vox_offset 100 is inside the header"},
		{name: "vox_offset fraction", m: setf(108, 352.5), kind: format, want: "not a whole number"},
		{name: "vox_offset NaN", m: setf(108, float32(math.NaN())), kind: format, want: "not a whole number"},
		{name: "pixdim NaN", m: setf(80, float32(math.NaN())), kind: format, want: "pixdim[1] is NaN"},
		{name: "pixdim Inf", m: setf(88, float32(math.Inf(1))), kind: format, want: "pixdim[3] is +Inf"},
		{name: "slope with infinite intercept", m: all(setf(112, 2), setf(116, float32(math.Inf(-1)))), kind: format, want: "scl_inter is -Inf"},
		{name: "data truncated", m: func(b []byte) []byte { return b[:len(b)-10] }, kind: format, want: "the file is 727 bytes"},
		{name: "header only", m: cut(348), kind: format, want: "ending at byte 737"},

		{name: "gz: empty stream", m: cut(0), gz: true, kind: format, want: "header truncated: 0 of 348"},
		{name: "gz: truncated header", m: cut(100), gz: true, kind: format, want: "header truncated: 100 of 348"},
		{name: "gz: truncated data", m: func(b []byte) []byte { return b[:len(b)-50] }, gz: true, kind: format, want: "truncated .nii.gz: the compressed data end in"},
		{name: "gz: truncated stream", gz: true, post: func(b []byte) []byte { return b[:len(b)/2] }, kind: format, want: "truncated .nii.gz: the compressed data end in"},
		{name: "gz: missing trailer", gz: true, post: func(b []byte) []byte { return b[:len(b)-8] }, kind: format, want: "truncated .nii.gz: the compressed data end in the gzip trailer"},
		{name: "gz: bad checksum", gz: true, post: func(b []byte) []byte { b[len(b)-8] ^= 0xff; return b }, kind: format, want: "checksum"},
		{name: "gz: bad checksum before padding", gz: true, post: func(b []byte) []byte { b[len(b)-8] ^= 0xff; return append(b, make([]byte, 16)...) }, kind: format, want: "checksum"},
		{name: "gz: corrupt deflate data", gz: true, post: func(b []byte) []byte {
			for i := 20; i < len(b)-8; i += 7 {
				b[i] ^= 0x5a
			}
			return b
		}, kind: format, want: "nifti: "},
		{name: "gz: corrupt gzip header", gz: true, post: func(b []byte) []byte { b[2] = 99; return b }, kind: format, want: "gzip header"},
		{name: "gz: 2^40 voxels", m: all(set16(42, 16384), set16(44, 8192), set16(46, 8192)), gz: true, kind: format,
			want: "too small for the 1099511627776 bytes"},
		{name: "gz: vox_offset past the data", m: setf(108, 1e5), gz: true, kind: format, want: "truncated .nii.gz: the compressed data end in"},
		{name: "gz: 4D series", m: all(set16(40, 4), set16(48, 20)), gz: true, kind: unsupported, want: "4D NIfTI (20 volumes)"},
	}
	dir := t.TempDir()
	for i, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			base := valid
			if c.base != nil {
				base = c.base
			}
			b := bytes.Clone(base)
			if c.m != nil {
				b = c.m(b)
			}
			name := "bad" + string(rune('a'+i%26)) + strings.Repeat("x", i/26) + ".nii"
			if c.gz {
				b = gzipped(b)
				name += ".gz"
			}
			if c.post != nil {
				b = c.post(b)
			}
			path := filepath.Join(dir, name)
			if err := os.WriteFile(path, b, 0o644); err != nil {
				t.Fatal(err)
			}
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			start := time.Now()
			err := openAndRead(path)
			elapsed := time.Since(start)
			runtime.ReadMemStats(&after)
			if err == nil {
				t.Fatal("accepted")
			}
			msg := err.Error()
			t.Log(msg)
			if !strings.HasPrefix(msg, "nifti: "+path+": ") || strings.Contains(msg, "\n") {
				t.Errorf("message %q: want one line starting with \"nifti: %s: \"", msg, path)
			}
			if !strings.Contains(msg, c.want) {
				t.Errorf("message %q lacks %q", msg, c.want)
			}
			var fe *FormatError
			var ue *UnsupportedError
			switch {
			case c.kind == format && !errors.As(err, &fe):
				t.Errorf("%T is not a *FormatError", err)
			case c.kind == unsupported && !errors.As(err, &ue):
				t.Errorf("%T is not an *UnsupportedError", err)
			}
			// The reader's buffers (1 MiB under the data, gzip's window) are the
			// only allocations; nothing in proportion to the header's claims.
			if grew := after.TotalAlloc - before.TotalAlloc; grew > 4<<20 {
				t.Errorf("allocated %d bytes", grew)
			}
			if elapsed > time.Second {
				t.Errorf("took %v", elapsed)
			}
		})
	}
}

// TestScalingRules checks which scl_slope/scl_inter pairs are applied.
// expected: nibabel's Nifti1Header.get_slope_inter (nibabel 5.0 docstring): slope 0
// or NaN means no scaling; nifti1.h: "if scl_slope is 0, no scaling".
func TestScalingRules(t *testing.T) {
	valid, err := os.ReadFile(filepath.Join("testdata", "int16_be_mm.nii"))
	if err != nil {
		t.Fatal(err)
	}
	nan, inf := float32(math.NaN()), float32(math.Inf(1))
	cases := []struct {
		slope, inter float32
		applied      bool
	}{
		{0, 0, false},
		{0, 5, false}, // a zero slope disables scaling, intercept and all
		{nan, 5, false},
		{inf, 0, false},
		{1, 0, false},
		{1, 5, true},
		{-2, 0, true},
		{0.25, -100, true},
	}
	dir := t.TempDir()
	for i, c := range cases {
		b := bytes.Clone(valid)
		binary.BigEndian.PutUint32(b[112:], math.Float32bits(c.slope))
		binary.BigEndian.PutUint32(b[116:], math.Float32bits(c.inter))
		path := filepath.Join(dir, "s"+string(rune('a'+i))+".nii")
		os.WriteFile(path, b, 0o644)
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		_, _, applied := r.Scaling()
		h := r.Header()
		wantType := volume.Int16
		if c.applied {
			wantType = volume.Float32
		}
		if applied != c.applied || h.Type != wantType {
			t.Errorf("slope %g inter %g: applied %v type %v, want %v %v", c.slope, c.inter, applied, h.Type, c.applied, wantType)
		}
		// Voxel 0 holds int16's minimum (fixture generator): check the arithmetic.
		s := new(volume.Slice)
		if err := r.ReadSlice(s); err != nil {
			t.Fatal(err)
		}
		want := -32768.0
		if c.applied {
			want = float64(float32(-32768*float64(c.slope) + float64(c.inter)))
		}
		if s.At(0) != want {
			t.Errorf("slope %g inter %g: voxel 0 = %g, want %g", c.slope, c.inter, s.At(0), want)
		}
		r.Close()
	}
}

// TestGzipPadding reads a .nii.gz with zero bytes after its gzip stream, and one made
// of two gzip members (RFC 1952 allows a series of members; bgzip writes them).
func TestGzipPadding(t *testing.T) {
	valid, err := os.ReadFile(filepath.Join("testdata", "uint16_um_ext.nii"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	padded := append(gzipped(valid), make([]byte, 64)...)
	half := len(valid) / 2
	members := append(gzipped(valid[:half]), gzipped(valid[half:])...)
	for name, b := range map[string][]byte{"padded.nii.gz": padded, "members.nii.gz": members} {
		path := filepath.Join(dir, name)
		os.WriteFile(path, b, 0o644)
		if err := openAndRead(path); err != nil {
			t.Errorf("%s: %v", name, err)
		}
	}
}

// TestPixdimBeyondDim0 reads a 2D image whose unused pixdim[3] is NaN: nifti1.h gives
// fields beyond dim[0] no meaning, so it is not an error and the z spacing is unknown.
func TestPixdimBeyondDim0(t *testing.T) {
	b, err := os.ReadFile(filepath.Join("testdata", "uint16_2d_um.nii"))
	if err != nil {
		t.Fatal(err)
	}
	binary.LittleEndian.PutUint32(b[88:], math.Float32bits(float32(math.NaN())))
	path := filepath.Join(t.TempDir(), "flat.nii")
	os.WriteFile(path, b, 0o644)
	r, err := Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if h := r.Header(); h.NZ != 1 || h.Spacing != [3]float64{0.5, 0.25, 0} {
		t.Errorf("header %+v, want one slice with z spacing unknown", h)
	}
}

// TestOpenVolumeBad: a series too large for the bound on voxels, a volume past the
// last and a negative volume are refused at once.
func TestOpenVolumeBad(t *testing.T) {
	valid, err := os.ReadFile(filepath.Join("testdata", "int16_4d3_mm.nii"))
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	huge := all(set16(42, 4096), set16(44, 4096), set16(46, 64), set16(48, 32767))(bytes.Clone(valid))
	hugePath := filepath.Join(dir, "huge.nii")
	os.WriteFile(hugePath, huge, 0o644)
	okPath := filepath.Join(dir, "ok.nii")
	os.WriteFile(okPath, valid, 0o644)
	for _, c := range []struct {
		path string
		vol  int
		want string
	}{
		{hugePath, 0, "32767 volumes of 4096×4096×64 voxels exceed 2^40"},
		{okPath, 3, "volume 3 asked for, the file has 3"},
		{okPath, -1, "numbered from 0"},
	} {
		r, err := OpenVolume(c.path, c.vol)
		if err == nil {
			r.Close()
			t.Errorf("%s volume %d: accepted", filepath.Base(c.path), c.vol)
			continue
		}
		if !strings.Contains(err.Error(), c.want) || !strings.HasPrefix(err.Error(), "nifti: "+c.path) {
			t.Errorf("%s volume %d: %v, want %q", filepath.Base(c.path), c.vol, err, c.want)
		}
	}
}
