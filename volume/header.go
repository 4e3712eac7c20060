package volume

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// SampleType is the type of one voxel's value as stored in a file.
type SampleType uint8

// The sample types tripass reads and writes.
const (
	Invalid SampleType = iota
	Uint8
	Uint16
	Int16
	Uint32
	Int32
	Float32
	Float64
)

var sampleNames = [...]string{
	Invalid: "invalid",
	Uint8:   "uint8",
	Uint16:  "uint16",
	Int16:   "int16",
	Uint32:  "uint32",
	Int32:   "int32",
	Float32: "float32",
	Float64: "float64",
}

// SampleTypes lists every valid sample type, in the order of their constants.
var SampleTypes = []SampleType{Uint8, Uint16, Int16, Uint32, Int32, Float32, Float64}

// String returns the name used on the command line and in JSON ("uint16", "float32", ...).
func (t SampleType) String() string {
	if int(t) < len(sampleNames) {
		return sampleNames[t]
	}
	return "SampleType(" + strconv.Itoa(int(t)) + ")"
}

// ParseSampleType returns the sample type named s (as String spells it).
func ParseSampleType(s string) (SampleType, error) {
	s = strings.ToLower(strings.TrimSpace(s))
	for _, t := range SampleTypes {
		if t.String() == s {
			return t, nil
		}
	}
	return Invalid, fmt.Errorf("unknown sample type %q (want one of uint8, uint16, int16, uint32, int32, float32, float64)", s)
}

// Size is the number of bytes of one sample.
func (t SampleType) Size() int {
	switch t {
	case Uint8:
		return 1
	case Uint16, Int16:
		return 2
	case Uint32, Int32, Float32:
		return 4
	case Float64:
		return 8
	}
	return 0
}

// Valid reports whether t is one of the sample types above.
func (t SampleType) Valid() bool { return t >= Uint8 && t <= Float64 }

// IsFloat reports whether t is an IEEE floating-point type.
func (t SampleType) IsFloat() bool { return t == Float32 || t == Float64 }

// IsSigned reports whether t can hold negative values.
func (t SampleType) IsSigned() bool { return t == Int16 || t == Int32 || t.IsFloat() }

// Range returns the smallest and largest value t can hold. For float types it is ±Inf.
func (t SampleType) Range() (lo, hi float64) {
	switch t {
	case Uint8:
		return 0, math.MaxUint8
	case Uint16:
		return 0, math.MaxUint16
	case Int16:
		return math.MinInt16, math.MaxInt16
	case Uint32:
		return 0, math.MaxUint32
	case Int32:
		return math.MinInt32, math.MaxInt32
	}
	return math.Inf(-1), math.Inf(1)
}

// MaxVoxels bounds the number of voxels a header may claim (2^40 = about 10^12, 4 TiB of
// uint32). It stops a corrupt or hostile header from driving allocations or loops; real
// stacks stay far below it.
const MaxVoxels = 1 << 40

// MaxSliceVoxels bounds nx·ny, since tripass holds several whole slices in memory
// (2^32 voxels is a 65536×65536 plane, 16 GiB as float32).
const MaxSliceVoxels = 1 << 32

// Header describes a volume: its size in voxels, the physical spacing between voxel
// centres along each axis and the sample type. x varies fastest in memory, then y;
// z is the slice index.
type Header struct {
	NX, NY, NZ int
	// Spacing is the distance between voxel centres along x, y and z, in Unit.
	// A zero spacing means unknown; Normalize sets unknown spacings to 1.
	Spacing [3]float64
	// Unit is the length unit of Spacing: "nm", "um", "mm", "m", or "" when the
	// spacing is in voxels (unknown physical size).
	Unit string
	Type SampleType
}

// SliceLen is the number of voxels in one z-slice.
func (h Header) SliceLen() int { return h.NX * h.NY }

// SliceBytes is the number of bytes of one z-slice in the header's sample type.
func (h Header) SliceBytes() int { return h.NX * h.NY * h.Type.Size() }

// Voxels is the number of voxels in the volume.
func (h Header) Voxels() int64 { return int64(h.NX) * int64(h.NY) * int64(h.NZ) }

// Bytes is the size of the voxel data in the header's sample type.
func (h Header) Bytes() int64 { return h.Voxels() * int64(h.Type.Size()) }

// ErrSize reports a header whose size is zero, negative or beyond MaxVoxels.
var ErrSize = errors.New("volume size out of range")

// Validate checks that the size is positive and bounded (without overflow) and the
// sample type is known. Every reader calls it before it allocates anything.
func (h Header) Validate() error {
	if h.NX <= 0 || h.NY <= 0 || h.NZ <= 0 {
		return fmt.Errorf("%w: %d×%d×%d", ErrSize, h.NX, h.NY, h.NZ)
	}
	if !h.Type.Valid() {
		return fmt.Errorf("unsupported sample type %v", h.Type)
	}
	// Check the products step by step so that they cannot overflow.
	if int64(h.NX) > MaxSliceVoxels || int64(h.NY) > MaxSliceVoxels ||
		int64(h.NX)*int64(h.NY) > MaxSliceVoxels {
		return fmt.Errorf("%w: slice of %d×%d voxels exceeds 2^32", ErrSize, h.NX, h.NY)
	}
	if int64(h.NZ) > MaxVoxels || int64(h.NX)*int64(h.NY) > MaxVoxels/int64(h.NZ) {
		return fmt.Errorf("%w: %d×%d×%d voxels exceeds 2^40", ErrSize, h.NX, h.NY, h.NZ)
	}
	for i, s := range h.Spacing {
		if math.IsNaN(s) || math.IsInf(s, 0) || s < 0 {
			return fmt.Errorf("invalid spacing %g along %c", s, "xyz"[i])
		}
	}
	return nil
}

// Normalize returns h with unknown (zero) spacings set to 1.
func (h Header) Normalize() Header {
	for i := range h.Spacing {
		if h.Spacing[i] == 0 {
			h.Spacing[i] = 1
		}
	}
	return h
}

// Units maps a length unit to its size in micrometres. The empty unit means voxels.
var unitMicrometres = map[string]float64{
	"nm": 1e-3,
	"um": 1,
	"mm": 1e3,
	"cm": 1e4,
	"m":  1e6,
}

// CanonicalUnit returns the canonical spelling of a length unit ("µm", "micron" → "um"),
// or an error for a unit tripass does not know.
func CanonicalUnit(u string) (string, error) {
	switch strings.ToLower(strings.TrimSpace(u)) {
	case "":
		return "", nil
	case "nm", "nanometer", "nanometre", "nanometers", "nanometres":
		return "nm", nil
	case "um", "µm", "μm", "micron", "microns", "micrometer", "micrometre", "micrometers", "micrometres":
		return "um", nil
	case "mm", "millimeter", "millimetre", "millimeters", "millimetres":
		return "mm", nil
	case "cm", "centimeter", "centimetre", "centimeters", "centimetres":
		return "cm", nil
	case "m", "meter", "metre", "meters", "metres":
		return "m", nil
	}
	return "", fmt.Errorf("unknown length unit %q (want nm, um, mm, cm or m)", u)
}

// ConvertLength converts v from unit from to unit to. Both must be canonical and non-empty.
func ConvertLength(v float64, from, to string) (float64, error) {
	f, ok1 := unitMicrometres[from]
	t, ok2 := unitMicrometres[to]
	if !ok1 || !ok2 {
		return 0, fmt.Errorf("cannot convert %s to %s", unitOrVoxels(from), unitOrVoxels(to))
	}
	return v * f / t, nil
}

func unitOrVoxels(u string) string {
	if u == "" {
		return "voxels"
	}
	return u
}

// ParseTriple parses "A" or "A,B,C" with an optional unit suffix on the last number
// ("0.65,0.65,2um", "1.5mm", "2"). One number is used for all three axes. The unit is
// returned in canonical form ("" when none was given).
func ParseTriple(s string) (v [3]float64, unit string, err error) {
	s = strings.TrimSpace(s)
	// Split a trailing unit off the whole string: digits, '.', 'e', sign end a number.
	end := len(s)
	for end > 0 {
		c := s[end-1]
		if (c >= '0' && c <= '9') || c == '.' {
			break
		}
		end--
	}
	unit, err = CanonicalUnit(s[end:])
	if err != nil {
		return v, "", err
	}
	parts := strings.Split(s[:end], ",")
	if len(parts) != 1 && len(parts) != 3 {
		return v, "", fmt.Errorf("%q: want one value or three separated by commas (X,Y,Z)", s)
	}
	for i, p := range parts {
		p = strings.TrimSpace(p)
		f, perr := strconv.ParseFloat(p, 64)
		if perr != nil || math.IsNaN(f) || math.IsInf(f, 0) {
			return v, "", fmt.Errorf("%q: %q is not a number", s, p)
		}
		v[i] = f
	}
	if len(parts) == 1 {
		v[1], v[2] = v[0], v[0]
	}
	return v, unit, nil
}
