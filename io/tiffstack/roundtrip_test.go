package tiffstack

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/volume"
)

// fillSlice fills s with values that exercise every byte of every sample: a smooth
// ramp (which predictors and compressors shrink), noise, and the extremes of the type
// (NaN and ±Inf in float types), from a fixed seed.
func fillSlice(s *volume.Slice, z int, rng *rand.Rand) {
	lo, hi := s.Type.Range()
	n := s.Len()
	for i := 0; i < n; i++ {
		x, y := i%s.NX, i/s.NX
		var v float64
		switch {
		case i == 0:
			v = lo
		case i == 1:
			v = hi
		case (x+y+z)%7 == 0:
			v = rng.Float64()*(math.Min(hi, 1e9)-math.Max(lo, -1e9)) + math.Max(lo, -1e9)
		default:
			v = float64(10*x + 3*y + 50*z)
		}
		if s.Type.IsFloat() {
			switch {
			case i == 0:
				v = math.Inf(-1)
			case i == 1:
				v = math.Inf(1)
			case i == 2:
				v = math.NaN()
			case x == 3:
				v = rng.NormFloat64() * 1e-3
			}
		}
		s.Set(i, v)
	}
}

// makeStack returns nz slices of test data.
func makeStack(h volume.Header) []*volume.Slice {
	rng := rand.New(rand.NewPCG(1, uint64(h.Type)))
	out := make([]*volume.Slice, h.NZ)
	for z := range out {
		out[z] = volume.NewSlice(h.NX, h.NY, h.Type)
		fillSlice(out[z], z, rng)
	}
	return out
}

func writeStack(t testing.TB, sink volume.Sink, data []*volume.Slice) {
	t.Helper()
	for z, s := range data {
		if err := sink.WriteSlice(s); err != nil {
			sink.Abort()
			t.Fatalf("slice %d: %v", z, err)
		}
	}
	if err := sink.Close(); err != nil {
		t.Fatal(err)
	}
}

// readAll reads every slice of src and checks it against want bit for bit.
func checkStack(t *testing.T, src volume.Source, want []*volume.Slice) {
	t.Helper()
	s := &volume.Slice{}
	for z := range want {
		if err := src.ReadSlice(s); err != nil {
			t.Fatalf("slice %d: %v", z, err)
		}
		if !bytes.Equal(s.Data, want[z].Data) {
			t.Fatalf("slice %d differs: first bytes %x, want %x", z, head(s.Data), head(want[z].Data))
		}
	}
	if err := src.ReadSlice(s); err != io.EOF {
		t.Fatalf("after the last slice: %v, want io.EOF", err)
	}
}

func head(b []byte) []byte { return b[:min(len(b), 16)] }

// TestRoundTrip writes and reads back every sample type × compression × predictor ×
// classic/BigTIFF × file/folder. Expected: the bytes written (a lossless format must
// return them unchanged).
func TestRoundTrip(t *testing.T) {
	for _, typ := range volume.SampleTypes {
		for _, comp := range []Compression{None, LZW, Deflate} {
			for _, pred := range []bool{false, true} {
				if pred && comp == None {
					continue
				}
				for _, big := range []bool{false, true} {
					for _, folder := range []bool{false, true} {
						name := fmt.Sprintf("%s/%s/pred=%v/big=%v/folder=%v", typ, comp, pred, big, folder)
						t.Run(name, func(t *testing.T) {
							h := volume.Header{NX: 37, NY: 23, NZ: 4, Type: typ, Spacing: [3]float64{0.65, 0.65, 2}, Unit: "um"}
							data := makeStack(h)
							opt := WriteOptions{Compression: comp, Predictor: pred, BigTIFF: big}
							path := filepath.Join(t.TempDir(), "stack.tif")
							var sink volume.Sink
							var err error
							if folder {
								sink, err = CreateFolder(path, h, opt)
							} else {
								sink, err = Create(path, h, opt)
							}
							if err != nil {
								t.Fatal(err)
							}
							writeStack(t, sink, data)
							var src interface {
								volume.Source
								volume.SliceSeeker
								Info() Info
							}
							if folder {
								src, err = OpenFolder(path)
							} else {
								src, err = Open(path)
							}
							if err != nil {
								t.Fatal(err)
							}
							defer src.Close()
							if got := src.Header(); got != h {
								t.Errorf("header %+v, want %+v", got, h)
							}
							in := src.Info()
							if in.BigTIFF != big || in.Compression[0] != comp.String() {
								t.Errorf("info %v, want BigTIFF=%v compression %v", in, big, comp)
							}
							checkStack(t, src, data)
							// Seek back and read a middle slice again.
							if err := src.SeekSlice(2); err != nil {
								t.Fatal(err)
							}
							s := &volume.Slice{}
							if err := src.ReadSlice(s); err != nil || !bytes.Equal(s.Data, data[2].Data) {
								t.Fatalf("slice 2 after seek: %v", err)
							}
						})
					}
				}
			}
		}
	}
}

// TestLargePages round-trips pages of several strips each, which the writer compresses
// and the reader decodes on parallel workers. Expected: the bytes written.
func TestLargePages(t *testing.T) {
	for _, typ := range []volume.SampleType{volume.Uint8, volume.Uint16, volume.Float32} {
		for _, comp := range []Compression{None, LZW, Deflate} {
			t.Run(fmt.Sprintf("%s/%s", typ, comp), func(t *testing.T) {
				h := volume.Header{NX: 1031, NY: 517, NZ: 3, Type: typ}
				data := makeStack(h)
				path := filepath.Join(t.TempDir(), "large.tif")
				w, err := Create(path, h, WriteOptions{Compression: comp, Predictor: comp != None})
				if err != nil {
					t.Fatal(err)
				}
				writeStack(t, w, data)
				r, err := Open(path)
				if err != nil {
					t.Fatal(err)
				}
				defer r.Close()
				if typ.Size() > 1 && r.Info().RowsPerStrip >= h.NY {
					t.Errorf("one strip of %d rows for a %d-byte page", r.Info().RowsPerStrip, h.SliceBytes())
				}
				checkStack(t, r, data)
			})
		}
	}
}

// TestShortVolume checks that closing a sink that got fewer slices than declared
// fails with volume.ErrShortVolume and leaves nothing at the target.
func TestShortVolume(t *testing.T) {
	h := volume.Header{NX: 8, NY: 8, NZ: 3, Type: volume.Uint16}
	data := makeStack(h)
	for _, folder := range []bool{false, true} {
		path := filepath.Join(t.TempDir(), "short.tif")
		var sink volume.Sink
		var err error
		if folder {
			sink, err = CreateFolder(path, h, WriteOptions{})
		} else {
			sink, err = Create(path, h, WriteOptions{Compression: LZW})
		}
		if err != nil {
			t.Fatal(err)
		}
		sink.WriteSlice(data[0])
		if err := sink.Close(); !errors.Is(err, volume.ErrShortVolume) {
			t.Errorf("folder=%v: Close = %v, want ErrShortVolume", folder, err)
		}
		ents, _ := os.ReadDir(filepath.Dir(path))
		if len(ents) != 0 {
			t.Errorf("folder=%v: left %d entries behind (%s)", folder, len(ents), ents[0].Name())
		}
	}
}
