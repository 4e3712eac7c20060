package volume

import (
	"encoding/binary"
	"fmt"
	"math"
)

// A Slice is one z-plane of a volume: NX×NY samples of one type, x fastest, stored as
// little-endian bytes whatever the byte order of the file it came from. Readers fill a
// Slice that the caller owns and reuses, so that streaming allocates nothing per slice.
type Slice struct {
	NX, NY int
	Type   SampleType
	Data   []byte // len NX*NY*Type.Size(), little-endian samples
}

// NewSlice allocates a zeroed slice of the given size and type.
func NewSlice(nx, ny int, t SampleType) *Slice {
	s := &Slice{}
	s.Reset(nx, ny, t)
	return s
}

// Reset resizes s to nx×ny samples of type t, reusing its buffer when it is large
// enough. The contents are unspecified afterwards.
func (s *Slice) Reset(nx, ny int, t SampleType) {
	n := nx * ny * t.Size()
	if cap(s.Data) < n {
		s.Data = make([]byte, n)
	}
	s.NX, s.NY, s.Type, s.Data = nx, ny, t, s.Data[:n]
}

// Len is the number of samples in s.
func (s *Slice) Len() int { return s.NX * s.NY }

// At returns sample i as a float64 (exact for every sample type).
func (s *Slice) At(i int) float64 {
	d := s.Data
	switch s.Type {
	case Uint8:
		return float64(d[i])
	case Uint16:
		return float64(binary.LittleEndian.Uint16(d[2*i:]))
	case Int16:
		return float64(int16(binary.LittleEndian.Uint16(d[2*i:])))
	case Uint32:
		return float64(binary.LittleEndian.Uint32(d[4*i:]))
	case Int32:
		return float64(int32(binary.LittleEndian.Uint32(d[4*i:])))
	case Float32:
		return float64(math.Float32frombits(binary.LittleEndian.Uint32(d[4*i:])))
	case Float64:
		return math.Float64frombits(binary.LittleEndian.Uint64(d[8*i:]))
	}
	panic("volume: At on slice of invalid type")
}

// ToFloat32 decodes every sample of s into dst, which must hold s.Len() values.
// Integer types convert exactly up to 2^24; uint32/int32 values beyond that round
// to the nearest float32.
func (s *Slice) ToFloat32(dst []float32) {
	n := s.Len()
	if len(dst) < n {
		panic(fmt.Sprintf("volume: ToFloat32 into %d values, need %d", len(dst), n))
	}
	dst = dst[:n]
	d := s.Data
	switch s.Type {
	case Uint8:
		d = d[:n]
		for i := range dst {
			dst[i] = float32(d[i])
		}
	case Uint16:
		d = d[:2*n]
		for i := range dst {
			dst[i] = float32(binary.LittleEndian.Uint16(d[2*i:]))
		}
	case Int16:
		d = d[:2*n]
		for i := range dst {
			dst[i] = float32(int16(binary.LittleEndian.Uint16(d[2*i:])))
		}
	case Uint32:
		d = d[:4*n]
		for i := range dst {
			dst[i] = float32(binary.LittleEndian.Uint32(d[4*i:]))
		}
	case Int32:
		d = d[:4*n]
		for i := range dst {
			dst[i] = float32(int32(binary.LittleEndian.Uint32(d[4*i:])))
		}
	case Float32:
		d = d[:4*n]
		for i := range dst {
			dst[i] = math.Float32frombits(binary.LittleEndian.Uint32(d[4*i:]))
		}
	case Float64:
		d = d[:8*n]
		for i := range dst {
			dst[i] = float32(math.Float64frombits(binary.LittleEndian.Uint64(d[8*i:])))
		}
	default:
		panic("volume: ToFloat32 on slice of invalid type")
	}
}

// FromFloat32 encodes src into s (which keeps its size and type), rounding to the
// nearest integer (halves away from zero) and clamping to the type's range for integer
// types. NaN becomes 0 in integer types. It returns how many values were clamped or
// were NaN in an integer type.
func (s *Slice) FromFloat32(src []float32) (clamped int) {
	n := s.Len()
	if len(src) < n {
		panic(fmt.Sprintf("volume: FromFloat32 from %d values, need %d", len(src), n))
	}
	src = src[:n]
	d := s.Data
	switch s.Type {
	case Float32:
		d = d[:4*n]
		for i, v := range src {
			binary.LittleEndian.PutUint32(d[4*i:], math.Float32bits(v))
		}
		return 0
	case Float64:
		d = d[:8*n]
		for i, v := range src {
			binary.LittleEndian.PutUint64(d[8*i:], math.Float64bits(float64(v)))
		}
		return 0
	}
	lo, hi := s.Type.Range()
	for i, v := range src {
		x, c := roundClamp(float64(v), lo, hi)
		clamped += c
		s.putInt(i, x)
	}
	return clamped
}

// Set stores v at sample i, rounded and clamped as in FromFloat32. It reports whether
// v was clamped.
func (s *Slice) Set(i int, v float64) bool {
	switch s.Type {
	case Float32:
		binary.LittleEndian.PutUint32(s.Data[4*i:], math.Float32bits(float32(v)))
		return false
	case Float64:
		binary.LittleEndian.PutUint64(s.Data[8*i:], math.Float64bits(v))
		return false
	}
	lo, hi := s.Type.Range()
	x, c := roundClamp(v, lo, hi)
	s.putInt(i, x)
	return c != 0
}

// roundClamp rounds v half away from zero and clamps it to [lo, hi]; it reports 1 when
// the rounded value lay outside the range (so −0.4 and 255.4 into uint8 are not
// clamped) or v was NaN.
func roundClamp(v, lo, hi float64) (float64, int) {
	r := math.Round(v)
	switch {
	case v != v: // NaN has no integer value
		return 0, 1
	case r < lo:
		return lo, 1
	case r > hi:
		return hi, 1
	}
	return r, 0
}

func (s *Slice) putInt(i int, x float64) {
	d := s.Data
	switch s.Type {
	case Uint8:
		d[i] = uint8(x)
	case Uint16:
		binary.LittleEndian.PutUint16(d[2*i:], uint16(x))
	case Int16:
		binary.LittleEndian.PutUint16(d[2*i:], uint16(int16(x)))
	case Uint32:
		binary.LittleEndian.PutUint32(d[4*i:], uint32(x))
	case Int32:
		binary.LittleEndian.PutUint32(d[4*i:], uint32(int32(x)))
	default:
		panic("volume: putInt on slice of type " + s.Type.String())
	}
}

// Convert writes src into dst converted to dst's type (dst is resized to src's size),
// rounding and clamping as FromFloat32 does, exactly for every pair of types (it goes
// through float64). It returns the number of clamped values.
func Convert(dst, src *Slice) (clamped int) {
	t := dst.Type
	dst.Reset(src.NX, src.NY, t)
	if t == src.Type {
		copy(dst.Data, src.Data)
		return 0
	}
	n := src.Len()
	for i := 0; i < n; i++ {
		if dst.Set(i, src.At(i)) {
			clamped++
		}
	}
	return clamped
}
