package volume

import (
	"errors"
	"math"
	"testing"
)

func TestValidateRejectsAbsurdSizes(t *testing.T) {
	tests := []struct {
		name string
		h    Header
		ok   bool
	}{
		{"ordinary", Header{NX: 512, NY: 512, NZ: 300, Type: Uint16}, true},
		{"zero", Header{NX: 0, NY: 5, NZ: 5, Type: Uint8}, false},
		{"negative", Header{NX: 5, NY: -5, NZ: 5, Type: Uint8}, false},
		{"2^40 voxels", Header{NX: 1 << 14, NY: 1 << 14, NZ: 1 << 12, Type: Uint8}, true},
		{"2^40+ voxels", Header{NX: 1 << 14, NY: 1 << 14, NZ: 1<<12 + 1, Type: Uint8}, false},
		{"overflowing product", Header{NX: math.MaxInt32, NY: math.MaxInt32, NZ: math.MaxInt32, Type: Uint8}, false},
		{"huge slice", Header{NX: 1 << 20, NY: 1 << 13, NZ: 1, Type: Uint8}, false},
		{"no type", Header{NX: 5, NY: 5, NZ: 5}, false},
		{"NaN spacing", Header{NX: 5, NY: 5, NZ: 5, Type: Uint8, Spacing: [3]float64{1, math.NaN(), 1}}, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			err := tt.h.Validate()
			if (err == nil) != tt.ok {
				t.Fatalf("Validate() = %v, want ok=%v", err, tt.ok)
			}
			if err != nil && tt.h.Type.Valid() && tt.name != "NaN spacing" && !errors.Is(err, ErrSize) {
				t.Errorf("error %v does not wrap ErrSize", err)
			}
		})
	}
}

func TestParseTriple(t *testing.T) {
	tests := []struct {
		in   string
		want [3]float64
		unit string
		ok   bool
	}{
		{"0.65,0.65,2um", [3]float64{0.65, 0.65, 2}, "um", true},
		{"2", [3]float64{2, 2, 2}, "", true},
		{"1.5mm", [3]float64{1.5, 1.5, 1.5}, "mm", true},
		{"1, 2, 3 nm", [3]float64{1, 2, 3}, "nm", true},
		{"1e-3,1e-3,2e-3mm", [3]float64{1e-3, 1e-3, 2e-3}, "mm", true},
		{"3µm", [3]float64{3, 3, 3}, "um", true},
		{"1,2", [3]float64{}, "", false},
		{"a,b,c", [3]float64{}, "", false},
		{"2furlongs", [3]float64{}, "", false},
	}
	for _, tt := range tests {
		v, u, err := ParseTriple(tt.in)
		if (err == nil) != tt.ok {
			t.Errorf("ParseTriple(%q) error %v, want ok=%v", tt.in, err, tt.ok)
			continue
		}
		if tt.ok && (v != tt.want || u != tt.unit) {
			t.Errorf("ParseTriple(%q) = %v %q, want %v %q", tt.in, v, u, tt.want, tt.unit)
		}
	}
}

func TestConvertLength(t *testing.T) {
	v, err := ConvertLength(2, "mm", "um")
	if err != nil || v != 2000 {
		t.Errorf("2 mm = %v um (%v), want 2000", v, err)
	}
	if _, err := ConvertLength(2, "", "um"); err == nil {
		t.Error("converting voxels to um succeeded")
	}
}
