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
