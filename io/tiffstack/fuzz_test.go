package tiffstack

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// FuzzOpen parses arbitrary bytes as a TIFF and, when they parse, decodes every page.
// It must never panic, hang or allocate beyond what the bytes can justify: a page
// that parses cannot claim more voxel bytes than its strips can decompress to.
// Seeded from every fixture in testdata and a few files written here.
func FuzzOpen(f *testing.F) {
	files, _ := filepath.Glob("testdata/*.tif")
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err == nil {
			f.Add(b)
		}
	}
	for _, opt := range []WriteOptions{{}, {Compression: LZW, Predictor: true}, {Compression: Deflate, BigTIFF: true}} {
		h := volume.Header{NX: 9, NY: 5, NZ: 2, Type: volume.Float32}
		path := filepath.Join(f.TempDir(), "seed.tif")
		w, err := Create(path, h, WriteOptions{Compression: opt.Compression, Predictor: opt.Predictor, BigTIFF: opt.BigTIFF, Overwrite: true})
		if err != nil {
			f.Fatal(err)
		}
		writeStack(f, w, makeStack(h))
		b, _ := os.ReadFile(path)
		f.Add(b)
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := parse(bytes.NewReader(data), int64(len(data)), false, nil)
		if err != nil {
			return
		}
		h := r.Header()
		if err := h.Validate(); err != nil {
			t.Fatalf("parsed header %+v does not validate: %v", h, err)
		}
		// The decompression ratio bound of checkChunks, with its slack.
		if int64(h.SliceBytes()) > 4096*int64(len(data))+1024 {
			t.Fatalf("%d-byte file parsed as %d×%d %s pages", len(data), h.NX, h.NY, h.Type)
		}
		// Decode at most a few MiB: a small file may legitimately expand a thousandfold
		// (and pages may share strips), which is bounded but slow to fuzz through.
		const budget = 4 << 20
		if h.SliceBytes() > budget {
			return
		}
		s := &volume.Slice{}
		for z := 0; z < min(h.NZ, budget/h.SliceBytes()); z++ {
			if err := r.ReadSlice(s); err != nil {
				break
			}
			if len(s.Data) != h.SliceBytes() {
				t.Fatalf("slice %d has %d bytes, want %d", z, len(s.Data), h.SliceBytes())
			}
		}
	})
}
