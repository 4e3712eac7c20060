package rawstack

import (
	"bytes"
	"encoding/binary"
	"errors"
	"io"
	"testing"

	"github.com/tripass/tripass/volume"
)

type memFile struct{ *bytes.Reader }

func (memFile) Close() error { return nil }

// FuzzOpen opens arbitrary bytes as a raw stack under an arbitrary description. Either
// the description is refused with a *FormatError before anything of its size is
// allocated, or every slice read back equals the file's bytes at the place the
// description puts it, in little-endian order.
func FuzzOpen(f *testing.F) {
	f.Add(4, 3, 2, uint8(volume.Uint16), false, int64(0), make([]byte, 48))
	f.Add(4, 3, 2, uint8(volume.Float64), true, int64(7), bytes.Repeat([]byte{1, 2, 3}, 70))
	f.Add(1, 1, 1, uint8(volume.Uint8), true, int64(0), []byte{9})
	f.Add(1<<14, 1<<13, 1<<13, uint8(volume.Uint32), false, int64(0), []byte{1, 2, 3, 4})
	f.Add(-1, 2, 2, uint8(volume.Int16), false, int64(-3), []byte{})
	f.Add(3, 3, 3, uint8(200), false, int64(1)<<62, []byte{0})
	f.Fuzz(func(t *testing.T, nx, ny, nz int, typ uint8, big bool, offset int64, data []byte) {
		h := volume.Header{NX: nx, NY: ny, NZ: nz, Type: volume.SampleType(typ)}
		var order binary.ByteOrder = binary.LittleEndian
		if big {
			order = binary.BigEndian
		}
		r, err := newReader("fuzz.raw", memFile{bytes.NewReader(data)}, int64(len(data)), h, order, offset)
		if err != nil {
			var fe *FormatError
			if !errors.As(err, &fe) {
				t.Fatalf("error %v is not a *FormatError", err)
			}
			return
		}
		need := h.Bytes()
		if offset < 0 || offset+need > int64(len(data)) {
			t.Fatalf("accepted %d bytes at offset %d from a file of %d", need, offset, len(data))
		}
		sb := h.SliceBytes()
		size := h.Type.Size()
		s := new(volume.Slice)
		for z := 0; z < nz; z++ {
			if err := r.ReadSlice(s); err != nil {
				t.Fatalf("slice %d: %v", z, err)
			}
			in := data[offset+int64(z*sb):][:sb]
			for i := 0; i < sb; i += size {
				for k := 0; k < size; k++ {
					j := k // little-endian: same order
					if big {
						j = size - 1 - k
					}
					if s.Data[i+k] != in[i+j] {
						t.Fatalf("slice %d byte %d: %d, file has %d", z, i+k, s.Data[i+k], in[i+j])
					}
				}
			}
		}
		if err := r.ReadSlice(s); err != io.EOF {
			t.Fatalf("after the last slice: %v", err)
		}
	})
}
