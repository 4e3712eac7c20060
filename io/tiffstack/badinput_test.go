package tiffstack

import (
	"encoding/binary"
	"errors"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"

	"github.com/tripass/tripass/volume"
)

// stackBytes writes a small stack with tripass and returns the file's bytes.
func stackBytes(t *testing.T, h volume.Header, opt WriteOptions) []byte {
	t.Helper()
	path := filepath.Join(t.TempDir(), "s.tif")
	w, err := Create(path, h, opt)
	if err != nil {
		t.Fatal(err)
	}
	writeStack(t, w, makeStack(h))
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// ifdOffsets walks the IFD chain of a classic little-endian TIFF (as tripass writes
// it; TIFF 6.0 Section 2) and returns the IFD offsets.
func ifdOffsets(b []byte) []int {
	var offs []int
	for off := int(binary.LittleEndian.Uint32(b[4:])); off != 0 && len(offs) < 100; {
		offs = append(offs, off)
		n := int(binary.LittleEndian.Uint16(b[off:]))
		off = int(binary.LittleEndian.Uint32(b[off+2+12*n:]))
	}
	return offs
}

// setTag overwrites the inline value of tag in IFD page (of a classic little-endian
// TIFF) with v, as a SHORT or LONG as the entry already is.
func setTag(t *testing.T, b []byte, page int, tag uint16, v uint32) {
	t.Helper()
	off := ifdOffsets(b)[page]
	n := int(binary.LittleEndian.Uint16(b[off:]))
	for i := 0; i < n; i++ {
		e := b[off+2+12*i:]
		if binary.LittleEndian.Uint16(e) != tag {
			continue
		}
		if binary.LittleEndian.Uint16(e[2:]) == dtShort {
			binary.LittleEndian.PutUint16(e[8:], uint16(v))
		} else {
			binary.LittleEndian.PutUint32(e[8:], v)
		}
		return
	}
	t.Fatalf("tag %d not in page %d", tag, page)
}

// setNext sets the next-IFD offset of IFD page.
func setNext(b []byte, page int, next uint32) {
	off := ifdOffsets(b)[page]
	n := int(binary.LittleEndian.Uint16(b[off:]))
	binary.LittleEndian.PutUint32(b[off+2+12*n:], next)
}

// TestBadInput feeds damaged files to Open and checks for a prompt error that names
// the file and the problem, of the right kind, without a big allocation. The damage
// is described by TIFF 6.0's own rules (the structure each case breaks).
func TestBadInput(t *testing.T) {
	h := volume.Header{NX: 20, NY: 20, NZ: 3, Type: volume.Uint16}
	plain := func(t *testing.T) []byte { return stackBytes(t, h, WriteOptions{}) }
	h1 := h
	h1.NZ = 1
	lzw := func(t *testing.T) []byte { return stackBytes(t, h1, WriteOptions{Compression: LZW, Predictor: true}) }
	cases := []struct {
		name   string
		make   func(t *testing.T) []byte
		want   string // in the message
		kind   any    // *FormatError, *UnsupportedError or an error sentinel; nil: any
		atRead bool   // Open succeeds and the first ReadSlice fails
	}{
		{"empty", func(t *testing.T) []byte { return nil }, "too short", io.ErrUnexpectedEOF, false},
		{"not TIFF", func(t *testing.T) []byte { return []byte("P5\n20 20\n255\n................") }, "not a TIFF", new(FormatError), false},
		{"truncated", func(t *testing.T) []byte { b := plain(t); return b[:len(b)-100] }, "past the end", new(FormatError), false},
		{"truncated in IFD", func(t *testing.T) []byte { b := plain(t); return b[:ifdOffsets(b)[2]+30] }, "more than the file holds", new(FormatError), false},
		{"strip offset past end", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 1, tStripOffsets, 1<<30)
			return b
		}, "strip 0: 800 bytes at offset 1073741824 run past the end", new(FormatError), false},
		{"IFD offset past end", func(t *testing.T) []byte { b := plain(t); setNext(b, 0, 1<<31); return b }, "past the end", new(FormatError), false},
		{"IFD loop", func(t *testing.T) []byte { b := plain(t); setNext(b, 2, 8); return b }, "loops", new(FormatError), false},
		{"unsupported compression", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 0, tCompression, 7)
			return b
		}, "compression JPEG (7)", new(UnsupportedError), false},
		{"RGB", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 0, tSamplesPerPixel, 3)
			return b
		}, "3 samples per pixel", new(UnsupportedError), false},
		{"unsupported sample type", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 0, tBitsPerSample, 12)
			return b
		}, "12-bit unsigned samples", new(UnsupportedError), false},
		{"ImageJ images past the pages", func(t *testing.T) []byte {
			// tifffile's ImageJ-style file (testdata) with its chain cut after page 0,
			// as in ImageJ's layout for files past 4 GiB.
			b, err := os.ReadFile("testdata/u16_imagej.tif")
			if err != nil {
				t.Fatal(err)
			}
			setNext(b, 0, 0)
			return b
		}, "ImageJ file of 5 images in 1 pages", new(UnsupportedError), false},
		{"pages of different sizes", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 2, tImageWidth, 19)
			return b
		}, "page 2 is 19×20 uint16, page 0 is 20×20 uint16", new(FormatError), false},
		{"strip count mismatch", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 1, tRowsPerStrip, 5)
			return b
		}, "page 1: 1 strip offsets and 1 byte counts, want 4", new(FormatError), false},
		{"2^40 voxels", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 0, tImageWidth, 1<<20)
			setTag(t, b, 0, tImageLength, 1<<20)
			return b
		}, "exceeds 2^32", new(FormatError), false},
		{"huge page in tiny LZW strips", func(t *testing.T) []byte {
			b := lzw(t)
			setTag(t, b, 0, tImageWidth, 65535)
			setTag(t, b, 0, tImageLength, 65535)
			setTag(t, b, 0, tRowsPerStrip, 65535)
			return b
		}, "cannot hold a 65535×65535 uint16 page", new(FormatError), false},
		{"uncompressed strip too short", func(t *testing.T) []byte {
			b := plain(t)
			setTag(t, b, 0, tStripByteCounts, 799)
			return b
		}, "holds 799 bytes, want 800", new(FormatError), false},
		{"truncated LZW data", func(t *testing.T) []byte {
			b := lzw(t)
			setTag(t, b, 0, tStripByteCounts, 10)
			return b
		}, "page 0: strip 0: LZW data ends early", io.ErrUnexpectedEOF, true},
		{"corrupt LZW data", func(t *testing.T) []byte {
			b := lzw(t)
			off := int(binary.LittleEndian.Uint32(b[ifdOffsets(b)[0]+2+12*5+8:])) // StripOffsets is the 6th entry
			for i := 2; i < 40; i++ {
				b[off+i] = 0xff
			}
			return b
		}, "LZW data", nil, true},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "bad.tif")
			if err := os.WriteFile(path, c.make(t), 0o644); err != nil {
				t.Fatal(err)
			}
			var ms0, ms1 runtime.MemStats
			runtime.ReadMemStats(&ms0)
			r, err := Open(path)
			if c.atRead {
				if err != nil {
					t.Fatalf("Open: %v", err)
				}
				s := &volume.Slice{}
				err = r.ReadSlice(s)
				r.Close()
			}
			runtime.ReadMemStats(&ms1)
			if err == nil {
				t.Fatal("no error")
			}
			msg := err.Error()
			t.Log(msg)
			if !strings.Contains(msg, path) || !strings.Contains(msg, c.want) || strings.Contains(msg, "\n") {
				t.Errorf("error %q: want one line naming %s and saying %q", msg, path, c.want)
			}
			switch k := c.kind.(type) {
			case *FormatError:
				if !errors.As(err, k) {
					t.Errorf("error %q is not a FormatError", msg)
				}
			case *UnsupportedError:
				if !errors.As(err, k) {
					t.Errorf("error %q is not an UnsupportedError", msg)
				}
			case error:
				if !errors.Is(err, k) {
					t.Errorf("error %q is not %v", msg, k)
				}
			}
			// A damaged header must not drive allocations (the test files are a few KB).
			if d := ms1.TotalAlloc - ms0.TotalAlloc; d > 1<<20 {
				t.Errorf("allocated %d bytes", d)
			}
		})
	}
}

// TestBadFolder checks slice folders with a gap, a mismatched slice, a duplicate
// number and no slices at all.
func TestBadFolder(t *testing.T) {
	h := volume.Header{NX: 12, NY: 9, NZ: 4, Type: volume.Int16}
	write := func(t *testing.T) string {
		dir := filepath.Join(t.TempDir(), "slices")
		w, err := CreateFolder(dir, h, WriteOptions{Compression: Deflate})
		if err != nil {
			t.Fatal(err)
		}
		writeStack(t, w, makeStack(h))
		return dir
	}
	cases := []struct {
		name   string
		damage func(t *testing.T, dir string)
		file   string // the file the error must name
		want   string
	}{
		{"gap", func(t *testing.T, dir string) {
			os.Rename(filepath.Join(dir, "z0002.tif"), filepath.Join(dir, "z0005.tif"))
			os.Rename(filepath.Join(dir, "z0003.tif"), filepath.Join(dir, "z0006.tif"))
		}, "z0005.tif", "slice 2–4 is missing"},
		{"mismatched slice", func(t *testing.T, dir string) {
			o := h
			o.NX, o.NZ = 13, 1
			w, err := Create(filepath.Join(dir, "z0002.tif"), o, WriteOptions{Overwrite: true})
			if err != nil {
				t.Fatal(err)
			}
			writeStack(t, w, makeStack(o))
		}, "z0002.tif", "slice is 13×9 int16, but z0000.tif is 12×9 int16"},
		{"duplicate number", func(t *testing.T, dir string) {
			b, _ := os.ReadFile(filepath.Join(dir, "z0001.tif"))
			os.WriteFile(filepath.Join(dir, "slice_1.tiff"), b, 0o644)
		}, "z0001.tif", "slice number 1 also names"},
		{"damaged slice", func(t *testing.T, dir string) {
			p := filepath.Join(dir, "z0003.tif")
			b, _ := os.ReadFile(p)
			os.WriteFile(p, b[:len(b)/2], 0o644)
		}, "z0003.tif", "past the end"},
		{"no slices", func(t *testing.T, dir string) {
			ents, _ := os.ReadDir(dir)
			for _, e := range ents {
				os.Remove(filepath.Join(dir, e.Name()))
			}
		}, "slices", "no .tif or .tiff files"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := write(t)
			c.damage(t, dir)
			_, err := OpenFolder(dir)
			if err == nil {
				t.Fatal("no error")
			}
			t.Log(err)
			if msg := err.Error(); !strings.Contains(msg, c.file) || !strings.Contains(msg, c.want) {
				t.Errorf("error %q: want it to name %s and say %q", msg, c.file, c.want)
			}
		})
	}
}
