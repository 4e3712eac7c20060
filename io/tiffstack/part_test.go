package tiffstack

import (
	"bytes"
	"encoding/json"
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode"

	"github.com/tripass/tripass/volume"
)

// rampVolume is a small float32 volume whose voxels all differ.
func rampVolume(nx, ny, nz int) (volume.Header, []float32) {
	h := volume.Header{NX: nx, NY: ny, NZ: nz, Type: volume.Float32, Spacing: [3]float64{0.5, 0.5, 2}, Unit: "um"}
	data := make([]float32, nx*ny*nz)
	for i := range data {
		data[i] = float32(i)*0.25 - 3
	}
	return h, data
}

func writeAll(t *testing.T, sink volume.Sink, h volume.Header, data []float32, z0, z1 int) {
	t.Helper()
	full := h
	full.NZ = z1 - z0
	n := h.NX * h.NY
	if _, err := volume.Copy(sink, volume.NewMemSource(full, data[z0*n:z1*n]), h.Type, nil); err != nil {
		t.Fatal(err)
	}
	if err := sink.Close(); err != nil {
		t.Fatal(err)
	}
}

func TestCreateNotedRoundTrip(t *testing.T) {
	h, data := rampVolume(7, 5, 4)
	for _, opt := range []WriteOptions{{}, {Compression: LZW, Predictor: true}, {Compression: Deflate, BigTIFF: true}} {
		t.Run(opt.Compression.String(), func(t *testing.T) {
			path := filepath.Join(t.TempDir(), "part.tif")
			// Spaces, a tab, a no-break space and an equals sign inside strings must not
			// break the one-line description.
			note := []byte(`{"job": "a b\tc", "where": "/data/my scans/x=1", "nbsp": "x` + "\u00a0" + `y", "n": [1, 2]}`)
			w, err := CreateNoted(path, h, opt, note)
			if err != nil {
				t.Fatal(err)
			}
			writeAll(t, w, h, data, 0, h.NZ)
			r, err := Open(path)
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			if got := r.Header(); got != h {
				t.Errorf("header %+v, want %+v (the spacing must survive the note)", got, h)
			}
			if strings.ContainsAny(r.Description(), "\t\n") || strings.Contains(r.Description(), "\u00a0") {
				t.Errorf("description has white space other than field separators: %q", r.Description())
			}
			var got, want any
			if err := json.Unmarshal(r.Note(), &got); err != nil {
				t.Fatalf("note %q: %v", r.Note(), err)
			}
			json.Unmarshal(note, &want)
			if g, _ := json.Marshal(got); !bytes.Equal(g, mustMarshal(want)) {
				t.Errorf("note %s, want %s", g, mustMarshal(want))
			}
			s := &volume.Slice{}
			n := h.NX * h.NY
			for z := 0; z < h.NZ; z++ {
				if err := r.ReadSlice(s); err != nil {
					t.Fatal(err)
				}
				for i := 0; i < n; i++ {
					if float32(s.At(i)) != data[z*n+i] {
						t.Fatalf("slice %d voxel %d: %v, want %v", z, i, s.At(i), data[z*n+i])
					}
				}
			}
		})
	}
}

func mustMarshal(v any) []byte { b, _ := json.Marshal(v); return b }

func TestCreateNotedRefuses(t *testing.T) {
	h, _ := rampVolume(3, 3, 2)
	dir := t.TempDir()
	if _, err := CreateNoted(filepath.Join(dir, "a.tif"), h, WriteOptions{}, []byte(`{"a":`)); err == nil {
		t.Error("accepted a note that is not JSON")
	}
	long := []byte(`"` + strings.Repeat("x", maxDescription) + `"`)
	if _, err := CreateNoted(filepath.Join(dir, "b.tif"), h, WriteOptions{}, long); !errors.Is(err, ErrNoteTooLong) {
		t.Errorf("a note longer than the readable description: %v, want ErrNoteTooLong", err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 0 {
		t.Errorf("refused notes left files: %v", ents)
	}
}

func TestNoteOfPlainStack(t *testing.T) {
	for _, desc := range []string{"", "tripass spacing=1,1,1 unit=um", "ImageJ=1.54 note={}", "tripass note={bad"} {
		if n := noteOf(desc); n != nil {
			t.Errorf("noteOf(%q) = %q, want nil", desc, n)
		}
	}
}

// TestFolderRangeMatchesFolder writes a folder in three ranges, as three tasks of one
// job would, and compares every file with CreateFolder's for the whole stack.
func TestFolderRangeMatchesFolder(t *testing.T) {
	for _, opt := range []WriteOptions{{}, {Compression: LZW, Predictor: true}, {Compression: Deflate}} {
		t.Run(opt.Compression.String(), func(t *testing.T) {
			h, data := rampVolume(9, 6, 11)
			dir := t.TempDir()
			whole := filepath.Join(dir, "whole")
			fw, err := CreateFolder(whole, h, opt)
			if err != nil {
				t.Fatal(err)
			}
			writeAll(t, fw, h, data, 0, h.NZ)
			parts := filepath.Join(dir, "deep", "parts") // parents are created
			for _, r := range [][2]int{{4, 8}, {0, 4}, {8, 11}} {
				w, err := CreateFolderRange(parts, h, opt, r[0], r[1])
				if err != nil {
					t.Fatal(err)
				}
				writeAll(t, w, h, data, r[0], r[1])
			}
			// A rerun of one range replaces its files.
			w, err := CreateFolderRange(parts, h, opt, 4, 8)
			if err != nil {
				t.Fatal(err)
			}
			writeAll(t, w, h, data, 4, 8)
			compareFolders(t, whole, parts)
			for z := 0; z < h.NZ; z++ {
				if got, want := FolderSliceName(h.NZ, z), fw.SliceName(z); got != want {
					t.Errorf("FolderSliceName(%d, %d) = %q, CreateFolder wrote %q", h.NZ, z, got, want)
				}
			}
		})
	}
}

func compareFolders(t *testing.T, a, b string) {
	t.Helper()
	ea, _ := os.ReadDir(a)
	eb, _ := os.ReadDir(b)
	if len(ea) != len(eb) {
		t.Fatalf("%s has %d files, %s has %d", a, len(ea), b, len(eb))
	}
	for i := range ea {
		if ea[i].Name() != eb[i].Name() {
			t.Fatalf("file %d: %s against %s", i, ea[i].Name(), eb[i].Name())
		}
		x, _ := os.ReadFile(filepath.Join(a, ea[i].Name()))
		y, _ := os.ReadFile(filepath.Join(b, eb[i].Name()))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs", ea[i].Name())
		}
	}
}

func TestFolderRangeShortAndBadRange(t *testing.T) {
	h, data := rampVolume(4, 3, 6)
	dir := t.TempDir()
	if _, err := CreateFolderRange(dir, h, WriteOptions{}, 3, 3); err == nil {
		t.Error("accepted an empty range")
	}
	if _, err := CreateFolderRange(dir, h, WriteOptions{}, 2, 7); err == nil {
		t.Error("accepted a range past the stack")
	}
	w, err := CreateFolderRange(dir, h, WriteOptions{}, 2, 5)
	if err != nil {
		t.Fatal(err)
	}
	sub := h
	sub.NZ = 1
	if _, err := volume.Copy(w, volume.NewMemSource(sub, data[2*12:3*12]), h.Type, nil); err != nil {
		t.Fatal(err)
	}
	if err := w.Close(); !errors.Is(err, volume.ErrShortVolume) {
		t.Errorf("Close after 1 of 3 slices: %v, want ErrShortVolume", err)
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 || ents[0].Name() != "z0002.tif" {
		t.Errorf("folder holds %v, want only the finished z0002.tif", ents)
	}
}

// TestCopyPageAssemblesParts assembles a stack from two noted parts by copying their
// pages, and compares it with the stack written in one go, byte for byte. A page laid
// out otherwise is refused and goes through WriteSlice instead.
func TestCopyPageAssemblesParts(t *testing.T) {
	u16 := func() (volume.Header, []float32) {
		h, d := rampVolume(300, 1000, 4) // 3 strips a page
		h.Type = volume.Uint16
		for i := range d {
			d[i] = float32(i % 5000)
		}
		return h, d
	}
	for _, tc := range []struct {
		name      string
		vol       func() (volume.Header, []float32)
		part, out WriteOptions
		copied    bool
	}{
		{"none", func() (volume.Header, []float32) { return rampVolume(300, 700, 4) }, WriteOptions{}, WriteOptions{}, true},
		{"lzw-predictor", u16, WriteOptions{Compression: LZW, Predictor: true}, WriteOptions{Compression: LZW, Predictor: true}, true},
		{"deflate-bigtiff-part", func() (volume.Header, []float32) { return rampVolume(9, 5, 4) }, WriteOptions{Compression: Deflate, BigTIFF: true}, WriteOptions{Compression: Deflate}, true},
		{"other-compression", u16, WriteOptions{Compression: LZW}, WriteOptions{Compression: Deflate}, false},
		{"other-predictor", u16, WriteOptions{Compression: LZW}, WriteOptions{Compression: LZW, Predictor: true}, false},
	} {
		t.Run(tc.name, func(t *testing.T) {
			h, data := tc.vol()
			dir := t.TempDir()
			whole := filepath.Join(dir, "whole.tif")
			w, err := Create(whole, h, tc.out)
			if err != nil {
				t.Fatal(err)
			}
			writeAll(t, w, h, data, 0, h.NZ)
			var parts []*Reader
			for i, r := range [][2]int{{0, 1}, {1, 4}} {
				ph := h
				ph.NZ = r[1] - r[0]
				path := filepath.Join(dir, "part"+string(rune('a'+i))+".tif")
				pw, err := CreateNoted(path, ph, tc.part, []byte(`{"part":1}`))
				if err != nil {
					t.Fatal(err)
				}
				writeAll(t, pw, h, data, r[0], r[1])
				pr, err := Open(path)
				if err != nil {
					t.Fatal(err)
				}
				defer pr.Close()
				parts = append(parts, pr)
			}
			joined := filepath.Join(dir, "joined.tif")
			jw, err := Create(joined, h, tc.out)
			if err != nil {
				t.Fatal(err)
			}
			s := &volume.Slice{}
			for _, pr := range parts {
				for z := 0; z < pr.Header().NZ; z++ {
					ok, err := jw.CopyPage(pr, z)
					if err != nil {
						t.Fatal(err)
					}
					if ok != tc.copied {
						t.Fatalf("page %d copied: %v, want %v", z, ok, tc.copied)
					}
					if !ok {
						if err := pr.SeekSlice(z); err != nil {
							t.Fatal(err)
						}
						if err := pr.ReadSlice(s); err != nil {
							t.Fatal(err)
						}
						if err := jw.WriteSlice(s); err != nil {
							t.Fatal(err)
						}
					}
				}
			}
			if err := jw.Close(); err != nil {
				t.Fatal(err)
			}
			a, _ := os.ReadFile(whole)
			b, _ := os.ReadFile(joined)
			if !bytes.Equal(a, b) {
				t.Errorf("assembled stack (%d bytes) differs from the stack written in one go (%d bytes)", len(b), len(a))
			}
		})
	}
}

// FuzzNote: any JSON value survives encodeNote and noteOf unchanged in meaning, stays
// one field with no white space, and noteOf never returns anything but valid JSON.
func FuzzNote(f *testing.F) {
	for _, s := range []string{`{"a":1}`, `"x y"`, `[1, 2, "\t"]`, `{"k": "a\u00a0b\u2028c"}`, `null`, `tripass note={`} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		if n := noteOf("tripass spacing=1,1,1 " + s); n != nil && !json.Valid(n) {
			t.Fatalf("noteOf returned invalid JSON %q", n)
		}
		if !json.Valid([]byte(s)) {
			return
		}
		field, err := encodeNote([]byte(s))
		if err != nil {
			t.Fatal(err)
		}
		if strings.ContainsFunc(field, unicode.IsSpace) {
			t.Fatalf("encoded note %q has white space", field)
		}
		got := noteOf("tripass spacing=1,1,1 unit=um " + field)
		// Numbers are compared as their text: valid JSON may hold numbers no float64
		// holds (1E700), which the note must carry all the same.
		a, err := decodeNumbers([]byte(s))
		if err != nil {
			t.Fatal(err)
		}
		b, err := decodeNumbers(got)
		if err != nil {
			t.Fatalf("note %q from %q: %v", got, s, err)
		}
		if !bytes.Equal(mustMarshal(a), mustMarshal(b)) {
			t.Fatalf("note %s, want %s", mustMarshal(b), mustMarshal(a))
		}
	})
}

// decodeNumbers decodes JSON keeping numbers as json.Number, so that any valid number
// survives and compares by its text.
func decodeNumbers(b []byte) (any, error) {
	d := json.NewDecoder(bytes.NewReader(b))
	d.UseNumber()
	var v any
	err := d.Decode(&v)
	return v, err
}
