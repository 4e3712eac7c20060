package rawstack

import (
	"encoding/binary"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// benchHeader is the stack of the performance target of issue 2: 512×512×256 uint16.
var benchHeader = volume.Header{NX: 512, NY: 512, NZ: 256, Type: volume.Uint16}

func writeBench(b *testing.B, path string, order binary.ByteOrder) {
	w, err := Create(path, benchHeader, order, true)
	if err != nil {
		b.Fatal(err)
	}
	s := volume.NewSlice(benchHeader.NX, benchHeader.NY, benchHeader.Type)
	for z := 0; z < benchHeader.NZ; z++ {
		if err := w.WriteSlice(s); err != nil {
			b.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		b.Fatal(err)
	}
}

func BenchmarkWrite(b *testing.B) {
	for _, o := range orders {
		b.Run(o.name, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "bench.raw")
			b.SetBytes(benchHeader.Bytes())
			b.ReportAllocs()
			for b.Loop() {
				writeBench(b, path, o.order)
			}
		})
	}
}

func BenchmarkRead(b *testing.B) {
	for _, o := range orders {
		b.Run(o.name, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "bench.raw")
			writeBench(b, path, o.order)
			s := volume.NewSlice(benchHeader.NX, benchHeader.NY, benchHeader.Type)
			b.SetBytes(benchHeader.Bytes())
			b.ReportAllocs()
			for b.Loop() {
				r, err := Open(path, benchHeader, o.order, 0)
				if err != nil {
					b.Fatal(err)
				}
				for {
					if err := r.ReadSlice(s); err == io.EOF {
						break
					} else if err != nil {
						b.Fatal(err)
					}
				}
				r.Close()
			}
			os.Remove(path)
		})
	}
}
