package nifti

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

// TestResume stops a .nii file after k slices, by Suspend (a signal) or as a kill after
// Sync with more bytes written past the durable point, continues it with Resume and
// checks that the file is byte for byte the file of an uninterrupted run.
func TestResume(t *testing.T) {
	h := volume.Header{NX: 6, NY: 5, NZ: 5, Type: volume.Int16, Spacing: [3]float64{0.5, 0.5, 1.5}, Unit: "mm"}
	rng := rand.New(rand.NewPCG(9, 9))
	src := make([]*volume.Slice, h.NZ)
	for z := range src {
		src[z] = volume.NewSlice(h.NX, h.NY, h.Type)
		for i := range src[z].Data {
			src[z].Data[i] = byte(rng.IntN(256))
		}
	}
	dir := t.TempDir()
	opt := WriteOptions{Description: "resume test"}
	whole := filepath.Join(dir, "whole.nii")
	w, err := Create(whole, h, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range src {
		w.WriteSlice(s)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	want, _ := os.ReadFile(whole)
	for k := 0; k <= h.NZ; k++ {
		for _, killed := range []bool{false, true} {
			out := filepath.Join(dir, "part.nii")
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
				t.Fatalf("k=%d: stop: %d slices, %v", k, done, err)
			}
			if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
				t.Fatalf("k=%d: the final name exists before completion", k)
			}
			r, err := Resume(out, h, opt, done, size)
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
	// Another header (here another description) is not continued.
	w, _ = CreateResumable(filepath.Join(dir, "x.nii"), h, opt)
	w.WriteSlice(src[0])
	_, size, _ := w.Suspend()
	if _, err := Resume(filepath.Join(dir, "x.nii"), h, WriteOptions{Description: "other"}, 1, size); err == nil {
		t.Fatal("a partial file with another header was continued")
	}
	if _, err := Resume(filepath.Join(dir, "y.nii"), h, opt, 1, size); !errors.Is(err, atomicfile.ErrNoPart) {
		t.Fatalf("no partial file: got %v", err)
	}
	if !Resumable("a.nii.gz") || !Resumable("a.NII") || Resumable("a.tif") {
		t.Fatal("Resumable: want .nii and .nii.gz")
	}
}

// TestResumeGzip stops a .nii.gz after k slices (by Suspend, or as a kill after Sync
// with more data compressed and written past the durable point), continues it from the
// slice Sync names and checks that the file is byte for byte the file of an
// uninterrupted run: one gzip member, whatever the cut. The slices span several of the
// stream's 512 KiB chunks, so cuts fall inside slices.
func TestResumeGzip(t *testing.T) {
	h := volume.Header{NX: 200, NY: 150, NZ: 24, Type: volume.Int16, Spacing: [3]float64{1, 1, 2}, Unit: "mm"}
	rng := rand.New(rand.NewPCG(3, 1))
	src := make([]*volume.Slice, h.NZ)
	for z := range src {
		src[z] = volume.NewSlice(h.NX, h.NY, h.Type)
		for i := range src[z].Data {
			src[z].Data[i] = byte(rng.IntN(4 + z)) // compressible, differently per slice
		}
	}
	dir := t.TempDir()
	opt := WriteOptions{Description: "resume test"}
	whole := filepath.Join(dir, "whole.nii.gz")
	w, err := Create(whole, h, opt)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range src {
		w.WriteSlice(s)
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	want, _ := os.ReadFile(whole)
	for k := 0; k <= h.NZ; k += 3 {
		for _, killed := range []bool{false, true} {
			out := filepath.Join(dir, "part.nii.gz")
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
				for _, s := range src[k:min(k+4, h.NZ)] {
					w.WriteSlice(s)
				}
				w.gz.drain()
				w.bw.Flush()
			} else {
				done, size, err = w.Suspend()
			}
			if err != nil || done > k {
				t.Fatalf("k=%d: stop: %d slices, %v", k, done, err)
			}
			r, err := Resume(out, h, opt, done, size)
			if err != nil {
				t.Fatalf("k=%d (done %d, %d bytes): %v", k, done, size, err)
			}
			t.Logf("k=%d killed=%v: resumed at slice %d, byte %d", k, killed, done, size)
			// A resumed run can be stopped and continued again.
			if done < h.NZ {
				r.WriteSlice(src[done])
				d2, s2, err := r.Suspend()
				if err != nil {
					t.Fatal(err)
				}
				if r, err = Resume(out, h, opt, d2, s2); err != nil {
					t.Fatalf("k=%d: second resume after %d: %v", k, d2, err)
				}
				done = d2
			}
			for _, s := range src[done:] {
				if err := r.WriteSlice(s); err != nil {
					t.Fatal(err)
				}
			}
			if err := r.Close(); err != nil {
				t.Fatal(err)
			}
			got, _ := os.ReadFile(out)
			if !bytes.Equal(got, want) {
				t.Fatalf("k=%d killed=%v (resumed at %d): file differs from an uninterrupted run", k, killed, done)
			}
			os.Remove(out)
		}
	}
}
