package tiffstack

import (
	"math"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// TestAutoBigTIFF checks the switch to BigTIFF from an upper bound of the file size,
// without writing gigabytes: a classic TIFF's offsets are 32-bit (TIFF 6.0 Section 2),
// so a file that could pass 4 GiB must be BigTIFF.
func TestAutoBigTIFF(t *testing.T) {
	cases := []struct {
		h    volume.Header
		comp Compression
		want bool
	}{
		{volume.Header{NX: 2048, NY: 2048, NZ: 400, Type: volume.Uint16}, None, false},    // 3.2 GiB
		{volume.Header{NX: 2048, NY: 2048, NZ: 600, Type: volume.Uint16}, None, true},     // 4.7 GiB
		{volume.Header{NX: 2048, NY: 2048, NZ: 400, Type: volume.Uint16}, LZW, true},      // LZW may grow by half
		{volume.Header{NX: 2048, NY: 2048, NZ: 511, Type: volume.Uint16}, None, false},    // 4 GiB − 8 MiB, plus 511 small IFDs
		{volume.Header{NX: 2048, NY: 2048, NZ: 512, Type: volume.Uint16}, None, true},     // exactly 4 GiB of voxels
		{volume.Header{NX: 2048, NY: 2048, NZ: 510, Type: volume.Uint16}, Deflate, false}, // 3.98 GiB + 0.1% framing
		{volume.Header{NX: 2048, NY: 2048, NZ: 512, Type: volume.Uint16}, Deflate, true},  // 4 GiB + framing
	}
	for _, c := range cases {
		w, err := Create(filepath.Join(t.TempDir(), "big.tif"), c.h, WriteOptions{Compression: c.comp})
		if err != nil {
			t.Fatal(err)
		}
		if w.BigTIFF() != c.want {
			t.Errorf("%d×%d×%d %s %v: BigTIFF %v, want %v", c.h.NX, c.h.NY, c.h.NZ, c.h.Type, c.comp, w.BigTIFF(), c.want)
		}
		w.Abort()
	}
}

// TestToRational checks the continued-fraction approximation used for XResolution:
// the rational must reproduce the value to within float64 rounding when it can.
func TestToRational(t *testing.T) {
	for _, x := range []float64{1 / 0.65e-4, 1 / 2e-4, 1e4, 0.01, 1.0 / 3, math.Pi, 123456.789} {
		n, d := toRational(x)
		if got := float64(n) / float64(d); !relClose(got, x, 1e-12) {
			t.Errorf("toRational(%g) = %d/%d = %g", x, n, d, got)
		}
	}
	if n, _ := toRational(0); n != 0 {
		t.Errorf("toRational(0) numerator %d", n)
	}
}

// TestSpacing round-trips spacings in every unit through the description and the
// resolution tags; a header without a unit writes no resolution tags.
func TestSpacing(t *testing.T) {
	for _, c := range []struct {
		sp   [3]float64
		unit string
	}{
		{[3]float64{0.65, 0.65, 2}, "um"},
		{[3]float64{0.1, 0.12, 0.5}, "mm"},
		{[3]float64{108.3, 108.3, 250}, "nm"},
		{[3]float64{1, 1, 1}, ""},
		{[3]float64{}, ""},
		{[3]float64{0.9765625, 0.9765625, 3}, "mm"},
	} {
		h := volume.Header{NX: 5, NY: 4, NZ: 2, Type: volume.Uint8, Spacing: c.sp, Unit: c.unit}
		path := filepath.Join(t.TempDir(), "sp.tif")
		w, err := Create(path, h, WriteOptions{})
		if err != nil {
			t.Fatal(err)
		}
		writeStack(t, w, makeStack(h))
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		r.Close()
		if got := r.Header(); got.Spacing != c.sp || got.Unit != c.unit {
			t.Errorf("spacing %v %q, want %v %q", got.Spacing, got.Unit, c.sp, c.unit)
		}
		if r.pages[0].hasRes != (c.unit != "") {
			t.Errorf("unit %q: resolution tags present = %v", c.unit, r.pages[0].hasRes)
		}
	}
}
