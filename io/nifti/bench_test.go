package nifti

import (
	"fmt"
	"io"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// benchHeader is the stack size of issue 2's performance target, 512×512×256 uint16
// (128 MiB), here for NIfTI; the values are a smooth pattern with noise, so that gzip
// has realistic work (image data compress roughly 2:1 at level 1).
var benchHeader = volume.Header{NX: 512, NY: 512, NZ: 256, Type: volume.Uint16, Spacing: [3]float64{1, 1, 1}, Unit: "mm"}

func benchSlice() *volume.Slice {
	s := volume.NewSlice(benchHeader.NX, benchHeader.NY, benchHeader.Type)
	x := uint32(1)
	for i := 0; i < s.Len(); i++ {
		x = x*1664525 + 1013904223 // a linear congruential generator (Numerical Recipes)
		s.Set(i, float64(1000+(i%512)*50+int(x>>28)))
	}
	return s
}

func BenchmarkWrite(b *testing.B) {
	s := benchSlice()
	for _, ext := range []string{".nii", ".nii.gz"} {
		b.Run(ext, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "bench"+ext)
			b.SetBytes(benchHeader.Bytes())
			b.ReportAllocs()
			for b.Loop() {
				w, err := Create(path, benchHeader, WriteOptions{Overwrite: true})
				if err != nil {
					b.Fatal(err)
				}
				for z := 0; z < benchHeader.NZ; z++ {
					if err := w.WriteSlice(s); err != nil {
						b.Fatal(err)
					}
				}
				if err := w.Close(); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkRead(b *testing.B) {
	s := benchSlice()
	for _, ext := range []string{".nii", ".nii.gz"} {
		b.Run(ext, func(b *testing.B) {
			path := filepath.Join(b.TempDir(), "bench"+ext)
			writeVolume(b, path, benchHeader, WriteOptions{}, repeat(s, benchHeader.NZ))
			b.SetBytes(benchHeader.Bytes())
			b.ReportAllocs()
			for b.Loop() {
				r, err := Open(path)
				if err != nil {
					b.Fatal(err)
				}
				for {
					if err := r.ReadSlice(s); err == io.EOF {
						break
					} else if err != nil {
						b.Fatal(fmt.Sprint(err))
					}
				}
				r.Close()
			}
		})
	}
}

func repeat(s *volume.Slice, n int) []*volume.Slice {
	out := make([]*volume.Slice, n)
	for i := range out {
		out[i] = s
	}
	return out
}
