package tiffstack

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// BenchmarkReadWrite writes and then reads a 512×512×256 uint16 stack (128 MiB) in
// b.TempDir(), one slice at a time, and reports MB/s of voxel data for each direction,
// and for a copy (read one file while writing another, as tripass convert does).
// scripts/bench_io.sh runs it beside cp of the same file (it sets TRIPASS_BENCH_DIR to
// keep the files). Compressed variants show what LZW and Deflate cost.
func BenchmarkReadWrite(b *testing.B) {
	h := volume.Header{NX: 512, NY: 512, NZ: 256, Type: volume.Uint16, Spacing: [3]float64{1, 1, 1}, Unit: "um"}
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	// A smooth phantom with mild noise, like a CT slice: compressible, not trivially.
	for i := 0; i < s.Len(); i++ {
		x, y := i%h.NX, i/h.NX
		s.Set(i, float64(1000+3*x+2*y+(x*y*7919)%61))
	}
	for _, c := range []struct {
		name string
		opt  WriteOptions
	}{
		{"none", WriteOptions{}},
		{"lzw+pred", WriteOptions{Compression: LZW, Predictor: true}},
		{"deflate+pred", WriteOptions{Compression: Deflate, Predictor: true}},
	} {
		dir := os.Getenv("TRIPASS_BENCH_DIR")
		if dir == "" {
			dir = b.TempDir()
		}
		path := filepath.Join(dir, "bench-"+c.name+".tif")
		write := func(b *testing.B) {
			opt := c.opt
			opt.Overwrite = true
			w, err := Create(path, h, opt)
			if err != nil {
				b.Fatal(err)
			}
			for z := 0; z < h.NZ; z++ {
				if err := w.WriteSlice(s); err != nil {
					b.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				b.Fatal(err)
			}
		}
		b.Run(fmt.Sprintf("%s/write", c.name), func(b *testing.B) {
			b.SetBytes(h.Bytes())
			b.ReportAllocs()
			for b.Loop() {
				write(b)
			}
		})
		if c.opt.Compression == None {
			// The same pages written to a new file without the final fsync that
			// atomicfile's Commit does: what the encoder and the write path cost on
			// their own, against cp, which does not sync either.
			b.Run(fmt.Sprintf("%s/write-nosync", c.name), func(b *testing.B) {
				b.SetBytes(h.Bytes())
				b.ReportAllocs()
				tmp := filepath.Join(dir, "bench-nosync.tif")
				for b.Loop() {
					os.Remove(tmp)
					enc, err := newPageEncoder(h, c.opt)
					if err != nil {
						b.Fatal(err)
					}
					f, err := os.Create(tmp)
					if err != nil {
						b.Fatal(err)
					}
					bw := bufio.NewWriterSize(f, writeBuffer)
					off, err := writeHeader(bw, false)
					for z := 0; z < h.NZ && err == nil; z++ {
						enc.encode(s)
						desc := ""
						if z == 0 {
							desc = description(h)
						}
						off, err = enc.writePage(bw, off, desc, z == h.NZ-1)
					}
					if err == nil {
						err = bw.Flush()
					}
					if cerr := f.Close(); err == nil {
						err = cerr
					}
					if err != nil {
						b.Fatal(err)
					}
				}
				os.Remove(tmp)
			})
		}
		ensure := func(b *testing.B) {
			if _, err := os.Stat(path); err != nil {
				write(b) // the read benchmarks were run without the write ones
			}
		}
		b.Run(fmt.Sprintf("%s/read", c.name), func(b *testing.B) {
			ensure(b)
			b.SetBytes(h.Bytes())
			b.ReportAllocs()
			dst := volume.NewSlice(h.NX, h.NY, h.Type)
			for b.Loop() {
				r, err := Open(path)
				if err != nil {
					b.Fatal(err)
				}
				for {
					if err := r.ReadSlice(dst); err == io.EOF {
						break
					} else if err != nil {
						b.Fatal(err)
					}
				}
				r.Close()
			}
		})
		if c.opt.Compression != None {
			continue
		}
		b.Run(fmt.Sprintf("%s/copy", c.name), func(b *testing.B) {
			ensure(b)
			b.SetBytes(h.Bytes())
			b.ReportAllocs()
			out := filepath.Join(dir, "bench-copy.tif")
			for b.Loop() {
				r, err := Open(path)
				if err != nil {
					b.Fatal(err)
				}
				w, err := Create(out, r.Header(), WriteOptions{Overwrite: true})
				if err != nil {
					b.Fatal(err)
				}
				if _, err := volume.Copy(w, r, h.Type, nil); err != nil {
					b.Fatal(err)
				}
				if err := w.Close(); err != nil {
					b.Fatal(err)
				}
				r.Close()
			}
		})
	}
}
