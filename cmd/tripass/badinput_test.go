package main

import (
	"bytes"
	"compress/gzip"
	"encoding/binary"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"
)

// Damaged and hostile files, built here byte by byte after the published layouts
// (TIFF 6.0 Section 2 for the header, IFDs and entries; the BigTIFF layout as Adobe's
// successor proposal gives it: 16-byte header, 8-byte counts and offsets, 20-byte
// entries; nifti1.h for the 348-byte NIfTI-1 header; NEP 1 for .npy), each run through
// the command line as a user would meet it.

// A tiffEntry is one IFD entry; val holds the value or the offset of the values.
type tiffEntry struct {
	tag, typ uint16
	count    uint64
	val      uint64
}

const (
	tShort = 3
	tLong  = 4
	tLong8 = 16
)

// tiffBytes lays out a little-endian TIFF (BigTIFF if big) with one IFD right after
// the header, whose next-IFD offset is next, and data after the IFD. entries gets the
// offset where data will start, so that strip offsets can point into it.
func tiffBytes(big bool, entries func(dataOff uint64) []tiffEntry, next uint64, data []byte) []byte {
	le := binary.LittleEndian
	hdr, cnt, ent, off := 8, 2, 12, 4
	if big {
		hdr, cnt, ent, off = 16, 8, 20, 8
	}
	n := len(entries(0))
	dataOff := uint64(hdr + cnt + n*ent + off)
	es := entries(dataOff)
	var b []byte
	if big {
		b = append(b, 'I', 'I')
		b = le.AppendUint16(b, 43)
		b = le.AppendUint16(b, 8)
		b = le.AppendUint16(b, 0)
		b = le.AppendUint64(b, 16)
		b = le.AppendUint64(b, uint64(len(es)))
	} else {
		b = append(b, 'I', 'I')
		b = le.AppendUint16(b, 42)
		b = le.AppendUint32(b, 8)
		b = le.AppendUint16(b, uint16(len(es)))
	}
	for _, e := range es {
		b = le.AppendUint16(b, e.tag)
		b = le.AppendUint16(b, e.typ)
		if big {
			b = le.AppendUint64(b, e.count)
			b = le.AppendUint64(b, e.val)
		} else {
			b = le.AppendUint32(b, uint32(e.count))
			if e.typ == tShort && e.count == 1 {
				b = le.AppendUint16(b, uint16(e.val))
				b = le.AppendUint16(b, 0)
			} else {
				b = le.AppendUint32(b, uint32(e.val))
			}
		}
	}
	if big {
		b = le.AppendUint64(b, next)
	} else {
		b = le.AppendUint32(b, uint32(next))
	}
	return append(b, data...)
}

// stripImage is the IFD of a w×h image of one 8-bit sample per pixel in one
// uncompressed strip at the start of the data, with changes applied by tag (a zero
// typ removes the entry; a tag not there is added).
func stripImage(w, h uint64, big bool, changes ...tiffEntry) func(uint64) []tiffEntry {
	return func(dataOff uint64) []tiffEntry {
		offType := uint16(tLong)
		if big {
			offType = tLong8
		}
		es := []tiffEntry{
			{256, tLong, 1, w},
			{257, tLong, 1, h},
			{258, tShort, 1, 8},
			{259, tShort, 1, 1},
			{262, tShort, 1, 1},
			{273, offType, 1, dataOff},
			{277, tShort, 1, 1},
			{278, tLong, 1, h},
			{279, offType, 1, w * h},
		}
	change:
		for _, c := range changes {
			for i := range es {
				if es[i].tag == c.tag {
					if c.typ == 0 {
						es = append(es[:i], es[i+1:]...)
					} else {
						if c.val == offsetHere {
							c.val = dataOff
						}
						es[i] = c
					}
					continue change
				}
			}
			if c.val == offsetHere {
				c.val = dataOff
			}
			es = append(es, c)
		}
		// Entries stay sorted by tag, as TIFF 6.0 requires.
		for i := 1; i < len(es); i++ {
			for j := i; j > 0 && es[j].tag < es[j-1].tag; j-- {
				es[j], es[j-1] = es[j-1], es[j]
			}
		}
		return es
	}
}

// offsetHere in a change stands for the offset of the data.
const offsetHere = math.MaxUint64 - 1

// niftiHeader returns a 352-byte little-endian NIfTI-1 single-file header (nifti1.h:
// sizeof_hdr 348 at 0, dim at 40, datatype at 70, bitpix at 72, pixdim at 76,
// vox_offset at 108, magic "n+1\0" at 344) for an nx×ny×nz volume of datatype dt.
func niftiHeader(nx, ny, nz int16, dt, bitpix int16) []byte {
	b := make([]byte, 352)
	le := binary.LittleEndian
	le.PutUint32(b[0:], 348)
	le.PutUint16(b[40:], 3)
	le.PutUint16(b[42:], uint16(nx))
	le.PutUint16(b[44:], uint16(ny))
	le.PutUint16(b[46:], uint16(nz))
	for i := 48; i < 56; i += 2 {
		le.PutUint16(b[i:], 1)
	}
	le.PutUint16(b[70:], uint16(dt))
	le.PutUint16(b[72:], uint16(bitpix))
	for i := 0; i < 8; i++ {
		le.PutUint32(b[76+4*i:], math.Float32bits(1))
	}
	le.PutUint32(b[108:], math.Float32bits(352))
	le.PutUint32(b[112:], math.Float32bits(1)) // scl_slope
	b[123] = 2                                 // mm
	copy(b[344:], "n+1\x00")
	return b
}

// npyBytes is a version 1.0 .npy file (NEP 1) with header dict dict and data.
func npyBytes(dict string, data []byte) []byte {
	h := dict
	for (10+len(h)+1)%64 != 0 {
		h += " "
	}
	h += "\n"
	b := append([]byte("\x93NUMPY\x01\x00"), 0, 0)
	binary.LittleEndian.PutUint16(b[8:], uint16(len(h)))
	return append(append(b, h...), data...)
}

func gzipped(b []byte) []byte {
	var buf bytes.Buffer
	zw := gzip.NewWriter(&buf)
	zw.Write(b)
	zw.Close()
	return buf.Bytes()
}

// badFile is one malformed file and what tripass must say about it.
type badFile struct {
	name string // file name, whose extension picks the format
	data []byte
	args []string // the command line; "F" stands for the file's path
	code int
	want string // a phrase the one-line error must hold (besides the file's name)
}

func badFiles() []badFile {
	info := []string{"info", "F"}
	convert := []string{"convert", "F", "out.tif"}
	inspect := []string{"kernel", "inspect", "F"}
	rawArgs := func(size, typ string, more ...string) []string {
		return append([]string{"convert", "F", "out.tif", "--raw-size", size, "--raw-type", typ}, more...)
	}
	pixels := bytes.Repeat([]byte{7}, 16)
	valid := func(big bool, changes ...tiffEntry) []byte {
		return tiffBytes(big, stripImage(4, 4, big, changes...), 0, pixels)
	}
	// A page whose only IFD's next offset points back at itself (offset 8), and a
	// BigTIFF one pointing back at 16.
	loop := tiffBytes(false, stripImage(4, 4, false), 8, pixels)
	loopBig := tiffBytes(true, stripImage(4, 4, true), 16, pixels)

	// LZW and Deflate strips whose compressed data is cut or garbage, with the byte
	// counts telling the truth about the (short) data: TIFF 6.0 Section 13 LZW codes
	// start with Clear (256) and end with EndOfInformation (257); RFC 1950 zlib data
	// starts 0x78.
	garbageLZW := tiffBytes(false, stripImage(64, 64, false, tiffEntry{259, tShort, 1, 5}, tiffEntry{279, tLong, 1, 3}), 0, []byte{0x80, 0x00, 0x20})
	cutDeflate := tiffBytes(false, stripImage(64, 64, false, tiffEntry{259, tShort, 1, 8}, tiffEntry{279, tLong, 1, 6}), 0, []byte{0x78, 0x9c, 0x63, 0x60, 0x18, 0x05})
	garbageDeflate := tiffBytes(false, stripImage(64, 64, false, tiffEntry{259, tShort, 1, 8}, tiffEntry{279, tLong, 1, 8}), 0, []byte{0x78, 0x9c, 0xff, 0xff, 0xff, 0xff, 0xff, 0xff})

	nii := func(nx, ny, nz, dt, bitpix int16, data []byte) []byte {
		return append(niftiHeader(nx, ny, nz, dt, bitpix), data...)
	}
	niiVoxOffset := nii(4, 4, 4, 2, 8, make([]byte, 64))
	binary.LittleEndian.PutUint32(niiVoxOffset[108:], math.Float32bits(1e9))
	niiMagic := nii(4, 4, 4, 2, 8, make([]byte, 64))
	copy(niiMagic[344:], "xyz\x00")
	niiDim0 := nii(4, 4, 4, 2, 8, make([]byte, 64))
	binary.LittleEndian.PutUint16(niiDim0[40:], 9)
	niiNegative := nii(4, -4, 4, 2, 8, make([]byte, 64))
	niiGood := gzipped(nii(8, 8, 8, 16, 32, make([]byte, 8*8*8*4)))

	return []badFile{
		// TIFF and BigTIFF
		{"empty.tif", nil, info, ExitInput, "too short"},
		{"text.tif", []byte("this is not an image, just some words\n"), info, ExitInput, "not a TIFF file"},
		{"header_cut.tif", []byte("II*\x00"), info, ExitInput, "too short"},
		{"ifd_past_end.tif", append([]byte("II*\x00"), 0xff, 0xff, 0, 0), info, ExitInput, "past the end of the file"},
		{"entries_past_end.tif", []byte("II*\x00\x08\x00\x00\x00\xff\xff\x00\x01"), info, ExitInput, "claims 65535 entries"},
		{"ifd_loop.tif", loop, info, ExitInput, "loop"},
		{"strip_past_end.tif", valid(false, tiffEntry{273, tLong, 1, 1 << 30}), convert, ExitInput, "past the end of the file"},
		{"count_past_end.tif", valid(false, tiffEntry{279, tLong, 1, 1 << 30}), convert, ExitInput, "past the end of the file"},
		{"strip_counts_mismatch.tif", valid(false, tiffEntry{278, tLong, 1, 1}), info, ExitInput, "want 4 for a 4×4 image"},
		{"no_strip_offsets.tif", valid(false, tiffEntry{273, 0, 0, 0}), info, ExitInput, "without StripOffsets"},
		{"rows_per_strip_zero.tif", valid(false, tiffEntry{278, tLong, 1, 0}), info, ExitInput, "RowsPerStrip is 0"},
		{"width_zero.tif", valid(false, tiffEntry{256, tLong, 1, 0}), info, ExitInput, "image width 0"},
		{"size_overflow.tif", valid(false, tiffEntry{256, tLong, 1, math.MaxUint32}, tiffEntry{257, tLong, 1, math.MaxUint32}), info, ExitInput, "4294967295×4294967295"},
		{"huge_claim.tif", valid(false, tiffEntry{256, tLong, 1, 60000}, tiffEntry{257, tLong, 1, 60000}, tiffEntry{278, tLong, 1, 60000}, tiffEntry{279, tLong, 1, 16}), convert, ExitInput, "holds 16 bytes, want 3600000000"},
		{"huge_claim_deflate.tif", valid(false, tiffEntry{256, tLong, 1, 60000}, tiffEntry{257, tLong, 1, 60000}, tiffEntry{259, tShort, 1, 8}, tiffEntry{278, tLong, 1, 60000}, tiffEntry{279, tLong, 1, 16}), convert, ExitInput, "cannot hold a 60000×60000"},
		{"jpeg.tif", valid(false, tiffEntry{259, tShort, 1, 7}), info, ExitInput, "compression"},
		{"bits12.tif", valid(false, tiffEntry{258, tShort, 1, 12}), info, ExitInput, "12-bit"},
		{"complex_samples.tif", valid(false, tiffEntry{258, tShort, 1, 32}, tiffEntry{339, tShort, 1, 6}), info, ExitInput, "SampleFormat 6"},
		{"rgb.tif", valid(false, tiffEntry{277, tShort, 1, 3}), info, ExitInput, "3 samples per pixel"},
		{"tiles_mismatch.tif", valid(false, tiffEntry{273, 0, 0, 0}, tiffEntry{279, 0, 0, 0},
			tiffEntry{322, tLong, 1, 16}, tiffEntry{323, tLong, 1, 16}, tiffEntry{324, tLong, 3, offsetHere}, tiffEntry{325, tLong, 1, 16}), info, ExitInput, "3 tile offsets and 1 byte counts, want 1"},
		{"lzw_garbage.tif", garbageLZW, convert, ExitInput, "LZW data ends early"},
		{"deflate_cut.tif", cutDeflate, convert, ExitInput, "Deflate data ends early"},
		{"deflate_garbage.tif", garbageDeflate, convert, ExitInput, "corrupt input"},
		{"bigtiff_bad_offset_size.tif", []byte("II+\x00\x04\x00\x00\x00\x10\x00\x00\x00\x00\x00\x00\x00"), info, ExitInput, "offset size other than 8"},
		{"bigtiff_huge_count.tif", []byte("II+\x00\x08\x00\x00\x00\x10\x00\x00\x00\x00\x00\x00\x00\xff\xff\xff\xff\xff\xff\xff\x7f"), info, ExitInput, "claims 9223372036854775807 entries"},
		{"bigtiff_ifd_past_end.tif", []byte("II+\x00\x08\x00\x00\x00\x00\x00\x00\x00\x00\x01\x00\x00"), info, ExitInput, "past the end of the file"},
		{"bigtiff_loop.tif", loopBig, info, ExitInput, "loop"},
		{"bigtiff_strip_past_end.tif", valid(true, tiffEntry{273, tLong8, 1, 1 << 40}), convert, ExitInput, "past the end of the file"},
		{"bigtiff_size_overflow.tif", valid(true, tiffEntry{256, tLong8, 1, 1 << 40}, tiffEntry{257, tLong8, 1, 1 << 40}), info, ExitInput, "image width 1099511627776"},

		// raw
		{"short.raw", make([]byte, 1000), rawArgs("64,64,64", "uint16"), ExitInput, "too short for 64×64×64 uint16"},
		{"absurd.raw", make([]byte, 1000), rawArgs("100000,100000,100000", "float64"), ExitUsage, "raw-size"},
		{"overflow.raw", make([]byte, 1000), rawArgs("9223372036854775807,2,2", "uint8"), ExitUsage, "raw-size"},
		{"zero.raw", make([]byte, 1000), rawArgs("0,10,10", "uint8"), ExitUsage, "raw-size"},
		{"offset_past_end.raw", make([]byte, 1000), rawArgs("10,10,10", "uint8", "--raw-offset", "5000"), ExitInput, "after an offset of 5000 bytes"},

		// NIfTI-1
		{"short.nii", make([]byte, 100), info, ExitInput, "header truncated"},
		{"bad_magic.nii", niiMagic, info, ExitInput, "no NIfTI-1 magic"},
		{"bad_dim0.nii", niiDim0, info, ExitInput, "dim[0] is 9"},
		{"negative_dim.nii", niiNegative, info, ExitInput, "negative"},
		{"huge_dims.nii", nii(32767, 32767, 32767, 64, 64, make([]byte, 64)), convert, ExitInput, "exceeds 2^40"},
		{"complex.nii", nii(4, 4, 4, 32, 64, make([]byte, 64*8)), info, ExitInput, "complex64"},
		{"vox_offset_past_end.nii", niiVoxOffset, convert, ExitInput, "vox_offset 1000000000"},
		{"data_cut.nii", nii(16, 16, 16, 16, 32, make([]byte, 100)), convert, ExitInput, "16384 bytes of float32 data"},
		{"gzip_garbage.nii.gz", append(append([]byte{}, niiGood[:10]...), bytes.Repeat([]byte{0xff}, 64)...), info, ExitInput, "corrupt compressed data"},
		{"gzip_cut.nii.gz", niiGood[:len(niiGood)/2], convert, ExitInput, "truncated"},

		// .npy kernels
		{"bad_magic.npy", []byte("\x93NUMPX\x01\x00\x10\x00{'descr': '<f8'}"), inspect, ExitInput, "not a .npy file"},
		{"header_past_end.npy", []byte("\x93NUMPY\x01\x00\xff\xff{'descr'"), inspect, ExitInput, "ends inside the header"},
		{"header_garbage.npy", npyBytes("{'descr': '<f8', 'fortran_order': False, 'shape': (3,3,", nil), inspect, ExitInput, "header"},
		{"huge_shape.npy", npyBytes("{'descr': '<f8', 'fortran_order': False, 'shape': (100000, 100000, 100000), }", make([]byte, 64)), inspect, ExitInput, "more than 1023 taps"},
		{"overflow_shape.npy", npyBytes("{'descr': '<f8', 'fortran_order': False, 'shape': (4294967296, 4294967296, 4294967296), }", make([]byte, 64)), inspect, ExitInput, "too many elements"},
		{"complex.npy", npyBytes("{'descr': '<c8', 'fortran_order': False, 'shape': (3, 3, 3), }", make([]byte, 27*8)), inspect, ExitInput, "<c8"},
		{"data_cut.npy", npyBytes("{'descr': '<f8', 'fortran_order': False, 'shape': (3, 3, 3), }", make([]byte, 100)), inspect, ExitInput, "needs 216 data bytes, file has 100"},

		// text kernels
		{"not_number.txt", []byte("1 2 3\n4 five 6\n"), inspect, ExitInput, "line 2"},
		{"ragged.txt", []byte("1 2 3\n4 5\n"), inspect, ExitInput, "line 2"},
		{"empty.txt", []byte("# only a comment\n\n"), inspect, ExitInput, "no values"},
		{"infinite.txt", []byte("1 2 3\n1 inf 1\n"), inspect, ExitInput, "line 2"},
		{"too_wide.txt", []byte(strings.Repeat("1 ", 5000) + "\n"), inspect, ExitInput, "longer than the limit of 1023"},
	}
}

// TestBadInputTable runs every malformed file through the command line and checks the
// exit code, a one-line message that names the file and the problem, and that the
// refusal is cheap: under a second and under 100 MB allocated, whatever the file
// claims. No output may appear.
func TestBadInputTable(t *testing.T) {
	dir := t.TempDir()
	cases := badFiles()
	if len(cases) < 30 {
		t.Fatalf("only %d malformed files", len(cases))
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			path := filepath.Join(dir, tc.name)
			if err := os.WriteFile(path, tc.data, 0o644); err != nil {
				t.Fatal(err)
			}
			args := make([]string, len(tc.args))
			for i, a := range tc.args {
				switch a {
				case "F":
					a = path
				case "out.tif":
					a = filepath.Join(dir, "out-"+tc.name+".tif")
				}
				args[i] = a
			}
			var before, after runtime.MemStats
			runtime.GC()
			runtime.ReadMemStats(&before)
			start := time.Now()
			if args[0] != "kernel" {
				args = append(args, "-q")
			}
			code, _, errs := runCLI(t, args...)
			took := time.Since(start)
			runtime.ReadMemStats(&after)
			alloc := after.TotalAlloc - before.TotalAlloc
			t.Logf("exit %d in %v, %d KiB allocated: %s", code, took, alloc>>10, strings.TrimSpace(errs))
			if code != tc.code {
				t.Errorf("exit %d, want %d", code, tc.code)
			}
			if strings.Count(errs, "\n") != 1 || !strings.HasPrefix(errs, "tripass: ") {
				t.Errorf("want one line starting 'tripass: ', got %q", errs)
			}
			// A usage error names the option at fault instead of the file.
			if tc.code != ExitUsage && !strings.Contains(errs, tc.name) {
				t.Errorf("the message does not name the file %s: %q", tc.name, errs)
			}
			if tc.want != "" && !strings.Contains(errs, tc.want) {
				t.Errorf("the message does not say %q: %q", tc.want, errs)
			}
			if took > time.Second {
				t.Errorf("took %v, want under 1 s", took)
			}
			if alloc > 100<<20 {
				t.Errorf("allocated %d MiB, want under 100 MB", alloc>>20)
			}
			if exists(filepath.Join(dir, "out-"+tc.name+".tif")) {
				t.Error("an output appeared")
			}
		})
	}
	// The control: the well-formed files the damaged ones were made from are read.
	good := filepath.Join(dir, "good.tif")
	os.WriteFile(good, tiffBytes(false, stripImage(4, 4, false), 0, bytes.Repeat([]byte{7}, 16)), 0o644)
	goodBig := filepath.Join(dir, "good_big.tif")
	os.WriteFile(goodBig, tiffBytes(true, stripImage(4, 4, true), 0, bytes.Repeat([]byte{7}, 16)), 0o644)
	goodNii := filepath.Join(dir, "good.nii")
	os.WriteFile(goodNii, append(niftiHeader(4, 4, 4, 2, 8), make([]byte, 64)...), 0o644)
	for _, p := range []string{good, goodBig, goodNii} {
		if code, _, errs := runCLI(t, "info", p); code != 0 {
			t.Errorf("control %s: exit %d: %s", filepath.Base(p), code, errs)
		}
	}
}
