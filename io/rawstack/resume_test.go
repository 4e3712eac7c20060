package rawstack

import (
	"bytes"
	"encoding/binary"
	"errors"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// resumeSlices makes nz random slices of h's size and type (fixed seed).
func resumeSlices(h volume.Header) []*volume.Slice {
	rng := rand.New(rand.NewPCG(5, 5))
	out := make([]*volume.Slice, h.NZ)
	for z := range out {
		s := volume.NewSlice(h.NX, h.NY, h.Type)
		for i := range s.Data {
			s.Data[i] = byte(rng.IntN(256))
		}
		out[z] = s
	}
	return out
}

// TestResume stops a raw stack after k slices, in the two ways a run stops (Suspend on
// a signal, or a kill after Sync with more bytes written but not recorded), continues
// it with Resume and checks that the file is byte for byte the file of an
// uninterrupted run.
func TestResume(t *testing.T) {
	h := volume.Header{NX: 7, NY: 5, NZ: 6, Type: volume.Int16}
	src := resumeSlices(h)
	dir := t.TempDir()
	whole := filepath.Join(dir, "whole.raw")
	w, err := Create(whole, h, binary.BigEndian, false)
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
			out := filepath.Join(dir, "part.raw")
			w, err := CreateResumable(out, h, binary.BigEndian, false)
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
				if k < h.NZ { // bytes written after the last durable point
					w.WriteSlice(src[k])
					w.bw.Flush()
				}
			} else {
				done, size, err = w.Suspend()
			}
			if err != nil || done != k || size != int64(k*h.SliceBytes()) {
				t.Fatalf("k=%d: stop: %d slices, %d bytes, %v", k, done, size, err)
			}
			if _, err := os.Stat(out); !errors.Is(err, os.ErrNotExist) {
				t.Fatalf("k=%d: the final name exists before completion", k)
			}
			r, err := Resume(out, h, binary.BigEndian, false, done)
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
			if _, err := os.Stat(atomicfile.PartName(out)); !errors.Is(err, os.ErrNotExist) {
				t.Fatalf("k=%d: partial file left after Close", k)
			}
			os.Remove(out)
		}
	}
}

func TestResumeRefusesShortOrMissingPart(t *testing.T) {
	h := volume.Header{NX: 4, NY: 4, NZ: 4, Type: volume.Uint8}
	out := filepath.Join(t.TempDir(), "v.raw")
	if _, err := Resume(out, h, nil, false, 2); !errors.Is(err, atomicfile.ErrNoPart) {
		t.Fatalf("no partial file: got %v, want ErrNoPart", err)
	}
	w, err := CreateResumable(out, h, nil, false)
	if err != nil {
		t.Fatal(err)
	}
	w.WriteSlice(volume.NewSlice(4, 4, volume.Uint8))
	w.Suspend()
	if _, err := Resume(out, h, nil, false, 3); !errors.Is(err, atomicfile.ErrShortPart) {
		t.Fatalf("partial file shorter than 3 slices: got %v, want ErrShortPart", err)
	}
}
