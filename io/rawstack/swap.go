package rawstack

import (
	"encoding/binary"
	"fmt"
)

// swapBytes reverses the bytes of every size-byte sample of b in place, turning
// big-endian samples into little-endian ones and back. size 1 leaves b unchanged.
func swapBytes(b []byte, size int) {
	switch size {
	case 1:
	case 2:
		n := len(b) &^ 1
		b = b[:n]
		for i := 0; i+1 < len(b); i += 2 {
			b[i], b[i+1] = b[i+1], b[i]
		}
	case 4:
		n := len(b) &^ 3
		b = b[:n]
		for i := 0; i+3 < len(b); i += 4 {
			binary.LittleEndian.PutUint32(b[i:], binary.BigEndian.Uint32(b[i:]))
		}
	case 8:
		n := len(b) &^ 7
		b = b[:n]
		for i := 0; i+7 < len(b); i += 8 {
			binary.LittleEndian.PutUint64(b[i:], binary.BigEndian.Uint64(b[i:]))
		}
	default:
		panic(fmt.Sprintf("rawstack: swapBytes of %d-byte samples", size))
	}
}
