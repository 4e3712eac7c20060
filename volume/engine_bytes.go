package volume

import (
	"encoding/binary"
	"math"
	"unsafe"
)

// littleEndian reports whether this machine stores numbers as Slice.Data does, so that
// float32 samples can be copied as they are.
var littleEndian = binary.NativeEndian.Uint16([]byte{1, 0}) == 1

// f32LE decodes len(dst) little-endian float32 samples from src: a plain copy on a
// little-endian machine (the decoding loop costs several times more), a loop elsewhere.
func f32LE(dst []float32, src []byte) {
	src = src[:4*len(dst)]
	if littleEndian && len(dst) > 0 {
		copy(dst, unsafe.Slice((*float32)(unsafe.Pointer(unsafe.SliceData(src))), len(dst)))
		return
	}
	for i := range dst {
		dst[i] = math.Float32frombits(binary.LittleEndian.Uint32(src[4*i:]))
	}
}

// putF32LE encodes src into dst as little-endian float32 samples (see f32LE).
func putF32LE(dst []byte, src []float32) {
	dst = dst[:4*len(src)]
	if littleEndian && len(src) > 0 {
		copy(unsafe.Slice((*float32)(unsafe.Pointer(unsafe.SliceData(dst))), len(src)), src)
		return
	}
	for i, v := range src {
		binary.LittleEndian.PutUint32(dst[4*i:], math.Float32bits(v))
	}
}

// encodeRow writes src into dst as samples of type t, exactly as Slice.FromFloat32 does
// (round half away from zero, clamp, NaN to 0, counting values beyond the range and
// NaNs), with loops specialised for the common types; the rest go through
// FromFloat32. It returns the number of clamped values.
func encodeRow(dst []byte, t SampleType, src []float32) (clamped int) {
	switch t {
	case Float32:
		putF32LE(dst, src)
		return 0
	case Uint8:
		dst = dst[:len(src)]
		for i, v := range src {
			x, c := roundUnsigned(v, math.MaxUint8)
			dst[i] = uint8(x)
			clamped += c
		}
		return clamped
	case Uint16:
		dst = dst[:2*len(src)]
		for i, v := range src {
			x, c := roundUnsigned(v, math.MaxUint16)
			binary.LittleEndian.PutUint16(dst[2*i:], uint16(x))
			clamped += c
		}
		return clamped
	case Int16:
		dst = dst[:2*len(src)]
		for i, v := range src {
			var x int16
			f := float64(v)
			switch {
			case f != f:
				clamped++
			case f <= math.MinInt16-0.5: // rounds below the range
				x = math.MinInt16
				clamped++
			case f >= math.MaxInt16+0.5: // rounds above the range
				x = math.MaxInt16
				clamped++
			case f < 0:
				x = int16(f - 0.5) // truncation towards zero: round half away from zero
			default:
				x = int16(f + 0.5)
			}
			binary.LittleEndian.PutUint16(dst[2*i:], uint16(x))
		}
		return clamped
	}
	s := Slice{NX: len(src), NY: 1, Type: t, Data: dst}
	return s.FromFloat32(src)
}

// roundUnsigned rounds v half away from zero into [0, hi], reporting 1 when the rounded
// value lay beyond the range or v was NaN. float64(v) + 0.5 is exact for every float32
// in range.
func roundUnsigned(v float32, hi float64) (uint32, int) {
	f := float64(v)
	switch {
	case f != f:
		return 0, 1
	case f <= -0.5: // rounds to −1 or below
		return 0, 1
	case f < 0:
		return 0, 0
	case f >= hi+0.5: // rounds above hi
		return uint32(hi), 1
	}
	return uint32(f + 0.5), 0
}
