package tiffstack

import (
	"bytes"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

func resumeSlices(h volume.Header) []*volume.Slice {
	rng := rand.New(rand.NewPCG(7, 7))
	out := make([]*volume.Slice, h.NZ)
	for z := range out {
		s := volume.NewSlice(h.NX, h.NY, h.Type)
		for i := range s.Data {
			s.Data[i] = byte(rng.IntN(16)) // compressible, so pages differ in length
		}
		out[z] = s
	}
	return out
}

// TestResume stops a multi-page file after k pages, either by Suspend (a signal) or as
// a kill after Sync (with more bytes written past the durable point), continues it with
// Resume and checks that the file is byte for byte the file of an uninterrupted run,
// for classic TIFF and BigTIFF, plain and compressed with a predictor.
func TestResume(t *testing.T) {
	h := volume.Header{NX: 9, NY: 6, NZ: 5, Type: volume.Uint16, Spacing: [3]float64{0.5, 0.5, 2}, Unit: "um"}
	src := resumeSlices(h)
	opts := map[string]WriteOptions{
		"plain":       {},
		"lzw_pred":    {Compression: LZW, Predictor: true},
		"bigtiff_zip": {Compression: Deflate, BigTIFF: true},
	}
	for name, opt := range opts {
		t.Run(name, func(t *testing.T) {
			dir := t.TempDir()
			whole := filepath.Join(dir, "whole.tif")
			w, err := Create(whole, h, opt)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range src {
				if err := w.WriteSlice(s); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			want, _ := os.ReadFile(whole)
			for k := 0; k <= h.NZ; k++ {
				for _, killed := range []bool{false, true} {
					out := filepath.Join(dir, "part.tif")
					w, err := CreateResumable(out, h, opt)
					if err != nil {
						t.Fatal(err)
					}
					for _, s := range src[:k] {
						if err := w.WriteSlice(s); err != nil {
							t.Fatal(err)
						}
					}
					var done int
					var size int64
					if killed {
						done, size, err = w.Sync()
						if k < h.NZ {
							w.WriteSlice(src[k])
							w.bw.Flush()
						}
					} else {
						done, size, err = w.Suspend()
					}
					if err != nil || done != k {
						t.Fatalf("k=%d: stop: %d pages, %v", k, done, err)
					}
					if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
						t.Fatalf("k=%d: the final name exists before completion", k)
					}
					var r *Writer
					if k == 0 {
						r, err = CreateResumable(out, h, opt)
					} else {
						r, err = Resume(out, h, opt, done, size)
					}
					if err != nil {
						t.Fatalf("k=%d: %v", k, err)
					}
					for _, s := range src[k:] {
						if err := r.WriteSlice(s); err != nil {
							t.Fatal(err)
						}
					}
					if err := r.Close(); err != nil {
						t.Fatal(err)
					}
					got, _ := os.ReadFile(out)
					if !bytes.Equal(got, want) {
						t.Fatalf("k=%d killed=%v: resumed file differs from an uninterrupted run", k, killed)
					}
					os.Remove(out)
				}
			}
		})
	}
}

// TestResumeRefusesOtherHeader: a partial file written as classic TIFF is not continued
// as BigTIFF.
func TestResumeRefusesOtherHeader(t *testing.T) {
	h := volume.Header{NX: 4, NY: 4, NZ: 3, Type: volume.Uint8}
	out := filepath.Join(t.TempDir(), "v.tif")
	w, err := CreateResumable(out, h, WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	w.WriteSlice(volume.NewSlice(4, 4, volume.Uint8))
	_, size, err := w.Suspend()
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Resume(out, h, WriteOptions{BigTIFF: true}, 1, size); err == nil {
		t.Fatal("a classic TIFF part was continued as BigTIFF")
	}
	if _, err := Resume(out, h, WriteOptions{}, 1, size+1); !errors.Is(err, atomicfile.ErrShortPart) {
		t.Fatalf("resume past the end: got %v, want ErrShortPart", err)
	}
}

// TestResumeFolder stops a slice folder after k slices (with a half-written file of
// the next slice, as a kill leaves), continues it and compares every file with an
// uninterrupted run's.
func TestResumeFolder(t *testing.T) {
	h := volume.Header{NX: 5, NY: 4, NZ: 4, Type: volume.Float32}
	src := resumeSlices(h)
	dir := t.TempDir()
	whole := filepath.Join(dir, "whole")
	w, err := CreateFolder(whole, h, WriteOptions{Compression: Deflate, Predictor: true})
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range src {
		w.WriteSlice(s)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	for k := 0; k <= h.NZ; k++ {
		out := filepath.Join(dir, "part")
		opt := WriteOptions{Compression: Deflate, Predictor: true}
		w, err := CreateFolderResumable(out, h, opt)
		if err != nil {
			t.Fatal(err)
		}
		for _, s := range src[:k] {
			w.WriteSlice(s)
		}
		done, _, err := w.Suspend()
		if err != nil || done != k {
			t.Fatalf("k=%d: %d, %v", k, done, err)
		}
		if k < h.NZ { // a torn file of the next slice
			os.WriteFile(filepath.Join(atomicfile.PartName(out), w.SliceName(k)), []byte("II*\x00"), 0o666)
		}
		if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
			t.Fatalf("k=%d: the final folder exists before completion", k)
		}
		r, err := ResumeFolder(out, h, opt, k)
		if err != nil {
			t.Fatalf("k=%d: %v", k, err)
		}
		for _, s := range src[k:] {
			if err := r.WriteSlice(s); err != nil {
				t.Fatal(err)
			}
		}
		if err := r.Close(); err != nil {
			t.Fatal(err)
		}
		for z := 0; z < h.NZ; z++ {
			a, _ := os.ReadFile(filepath.Join(whole, w.SliceName(z)))
			b, err := os.ReadFile(filepath.Join(out, w.SliceName(z)))
			if err != nil || !bytes.Equal(a, b) {
				t.Fatalf("k=%d: slice %d differs from an uninterrupted run (%v)", k, z, err)
			}
		}
		os.RemoveAll(out)
	}
}
