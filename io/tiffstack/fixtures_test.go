package tiffstack

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tripass/tripass/volume"
)

// manifest is testdata/manifest.json, written by scripts/make_tiff_fixtures.py with
// tifffile 2023.2.3, NumPy 1.24.2 and libtiff 4.5.0's tiffcp (Debian 12).
type manifest struct {
	Fixtures []struct {
		File        string
		Data        string
		Type        string
		Size        [3]int
		Spacing     [3]float64
		Unit        string
		Pages       int
		Skipped     int
		BigTIFF     bool
		ByteOrder   string
		Compression string // tifffile's COMPRESSION name
		Predictor   int
		Tiled       bool
	}
	Unsupported []struct {
		File  string
		Error string
	}
	Folders []struct {
		Dir       string
		Data      string
		Type      string
		Size      [3]int
		SpacingUM float64 `json:"spacing_um"`
	}
}

func loadManifest(t testing.TB) *manifest {
	b, err := os.ReadFile("testdata/manifest.json")
	if err != nil {
		t.Fatal(err)
	}
	var m manifest
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	if len(m.Fixtures) == 0 {
		t.Fatal("manifest lists no fixtures")
	}
	return &m
}

// tifffile's names of the compressions the fixtures use, and ours.
var compressionNames = map[string]string{
	"NONE":          "none",
	"LZW":           "LZW",
	"ADOBE_DEFLATE": "Deflate",
	"DEFLATE":       "Deflate (old code 32946)",
	"PACKBITS":      "PackBits",
}

func readAllSlices(t *testing.T, src volume.Source) []byte {
	t.Helper()
	h := src.Header()
	var all []byte
	s := &volume.Slice{}
	for z := 0; z < h.NZ; z++ {
		if err := src.ReadSlice(s); err != nil {
			t.Fatalf("slice %d: %v", z, err)
		}
		all = append(all, s.Data...)
	}
	return all
}

func relClose(a, b, tol float64) bool {
	return math.Abs(a-b) <= tol*math.Max(math.Abs(a), math.Abs(b))
}

// TestFixtures reads every stack written by tifffile and tiffcp and compares it bit for
// bit with the voxels NumPy wrote beside it, and the header and layout with what
// tifffile reports of the same file.
func TestFixtures(t *testing.T) {
	t.Run("serial", testFixtures)
	// The same files with every compressed page decoded by parallel workers.
	defer func(v int) { parallelMin = v }(parallelMin)
	parallelMin = 0
	t.Run("parallel", testFixtures)
}

func testFixtures(t *testing.T) {
	m := loadManifest(t)
	for _, f := range m.Fixtures {
		t.Run(f.File, func(t *testing.T) {
			r, err := Open(filepath.Join("testdata", f.File))
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			h := r.Header()
			typ, err := volume.ParseSampleType(f.Type)
			if err != nil {
				t.Fatal(err)
			}
			// expected: size and dtype as written by tifffile 2023.2.3 (manifest).
			if h.NX != f.Size[0] || h.NY != f.Size[1] || h.NZ != f.Size[2] || h.Type != typ {
				t.Errorf("header %d×%d×%d %s, want %v %s", h.NX, h.NY, h.NZ, h.Type, f.Size, f.Type)
			}
			// expected: spacing = 10000 / (XResolution in pixels per cm) µm, from the
			// rational tifffile read back from the file (manifest).
			for i := range 3 {
				if !relClose(h.Spacing[i], f.Spacing[i], 1e-12) {
					t.Errorf("spacing %v, want %v", h.Spacing, f.Spacing)
					break
				}
			}
			if h.Unit != f.Unit {
				t.Errorf("unit %q, want %q", h.Unit, f.Unit)
			}
			in := r.Info()
			wantOrder := binary.ByteOrder(binary.LittleEndian)
			if f.ByteOrder == "big" {
				wantOrder = binary.BigEndian
			}
			wantPages := f.Pages // stack pages, reduced-resolution ones left out
			// expected: layout as tifffile 2023.2.3 reports it (TiffFile.is_bigtiff,
			// byteorder, pages[0].compression, predictor, is_tiled).
			if in.BigTIFF != f.BigTIFF || in.ByteOrder != wantOrder || in.Tiled != f.Tiled ||
				in.Pages != wantPages || in.Skipped != f.Skipped ||
				len(in.Compression) != 1 || in.Compression[0] != compressionNames[f.Compression] {
				t.Errorf("info %v (%+v), want bigtiff=%v order=%s tiled=%v pages=%d skipped=%d compression=%s",
					in, in, f.BigTIFF, f.ByteOrder, f.Tiled, wantPages, f.Skipped, f.Compression)
			}
			if f.Compression == "LZW" || f.Compression == "ADOBE_DEFLATE" {
				if len(in.Predictor) != 1 || in.Predictor[0] != predictorName(uint16(f.Predictor)) {
					t.Errorf("predictor %v, want %s", in.Predictor, predictorName(uint16(f.Predictor)))
				}
			}
			want, err := os.ReadFile(filepath.Join("testdata", f.Data))
			if err != nil {
				t.Fatal(err)
			}
			// expected: the voxels NumPy 1.24.2 wrote as little-endian raw bytes.
			if got := readAllSlices(t, r); !bytes.Equal(got, want) {
				t.Errorf("voxels differ from %s", f.Data)
			}
		})
	}
	for _, f := range m.Unsupported {
		t.Run(f.File, func(t *testing.T) {
			_, err := Open(filepath.Join("testdata", f.File))
			var ue UnsupportedError
			if !errors.As(err, &ue) || !strings.Contains(err.Error(), f.Error) {
				t.Errorf("Open: %v, want an UnsupportedError saying %q", err, f.Error)
			}
		})
	}
	for _, f := range m.Folders {
		t.Run(f.Dir, func(t *testing.T) {
			r, err := OpenFolder(filepath.Join("testdata", f.Dir))
			if err != nil {
				t.Fatal(err)
			}
			defer r.Close()
			h := r.Header()
			if h.NX != f.Size[0] || h.NY != f.Size[1] || h.NZ != f.Size[2] || h.Type.String() != f.Type {
				t.Errorf("header %+v, want %v %s", h, f.Size, f.Type)
			}
			// expected: spacing written by tifffile as 10000/2.5 pixels per cm.
			if !relClose(h.Spacing[0], f.SpacingUM, 1e-6) || h.Unit != "um" {
				t.Errorf("spacing %v %s, want %g um", h.Spacing, h.Unit, f.SpacingUM)
			}
			want, err := os.ReadFile(filepath.Join("testdata", f.Data))
			if err != nil {
				t.Fatal(err)
			}
			// expected: NumPy's stack in slice order 1, 2, …, 11 (natural order of the
			// numbers in slice_1.tif … slice_11.tif, not name order).
			if got := readAllSlices(t, r); !bytes.Equal(got, want) {
				t.Errorf("voxels differ from %s (slice order?)", f.Data)
			}
		})
	}
}
