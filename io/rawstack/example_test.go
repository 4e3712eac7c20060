package rawstack_test

import (
	"encoding/binary"
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/tripass/tripass/io/rawstack"
	"github.com/tripass/tripass/volume"
)

// A small big-endian 16-bit stack is written with a 64-byte header of some other
// program in front, then read back slice by slice.
func Example() {
	dir, err := os.MkdirTemp("", "rawstack-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "core.raw")

	h := volume.Header{NX: 4, NY: 3, NZ: 2, Type: volume.Uint16, Spacing: [3]float64{5, 5, 5}, Unit: "um"}
	w, err := rawstack.Create(path, h, binary.BigEndian, false)
	if err != nil {
		log.Fatal(err)
	}
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	for z := 0; z < h.NZ; z++ {
		for i := 0; i < s.Len(); i++ {
			s.Set(i, float64(1000*z+i)) // a ramp: grain density rising along x
		}
		if err := w.WriteSlice(s); err != nil {
			log.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		log.Fatal(err)
	}
	// Put a 64-byte header in front, as some instruments do.
	data, _ := os.ReadFile(path)
	os.WriteFile(path, append(make([]byte, 64), data...), 0o644)

	r, err := rawstack.Open(path, h, binary.BigEndian, 64)
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	r.SeekSlice(1)
	if err := r.ReadSlice(s); err != nil {
		log.Fatal(err)
	}
	fmt.Println("slice 1 starts with", s.At(0), s.At(1), s.At(2))
	fmt.Println("bytes after the data:", r.Extra())

	// The same file described as 4×3×3 is too short.
	h.NZ = 3
	_, err = rawstack.Open(path, h, binary.BigEndian, 64)
	fmt.Println(err != nil)
	// Output:
	// slice 1 starts with 1000 1001 1002
	// bytes after the data: 0
	// true
}
