package rawstack

import (
	"bytes"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
	"time"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// sampleValues returns n values of type t, exactly representable in t: the type's
// extremes first, then pseudo-random values spread over its range (fixed seed).
func sampleValues(t volume.SampleType, n int, seed uint64) []float64 {
	rng := rand.New(rand.NewPCG(seed, 7))
	lo, hi := t.Range()
	v := make([]float64, n)
	for i := range v {
		switch {
		case t.IsFloat():
			v[i] = float64(float32(rng.NormFloat64() * 1e3))
			if t == volume.Float64 {
				v[i] = rng.NormFloat64() * 1e-3
			}
		case i == 0:
			v[i] = lo
		case i == 1:
			v[i] = hi
		default:
			v[i] = math.Floor(lo + rng.Float64()*(hi-lo+1))
			v[i] = math.Min(math.Max(v[i], lo), hi)
		}
	}
	if t.IsFloat() && n > 2 {
		v[0], v[1] = math.Inf(-1), math.NaN()
	}
	return v
}

// encodeRef encodes values of type t in the byte order order with encoding/binary
// (the standard library's reference encoders), independently of the package's own
// byte swapping.
func encodeRef(t volume.SampleType, order binary.ByteOrder, values []float64) []byte {
	b := make([]byte, len(values)*t.Size())
	for i, v := range values {
		switch t {
		case volume.Uint8:
			b[i] = uint8(v)
		case volume.Uint16:
			order.PutUint16(b[2*i:], uint16(v))
		case volume.Int16:
			order.PutUint16(b[2*i:], uint16(int16(v)))
		case volume.Uint32:
			order.PutUint32(b[4*i:], uint32(v))
		case volume.Int32:
			order.PutUint32(b[4*i:], uint32(int32(v)))
		case volume.Float32:
			order.PutUint32(b[4*i:], math.Float32bits(float32(v)))
		case volume.Float64:
			order.PutUint64(b[8*i:], math.Float64bits(v))
		}
	}
	return b
}

// testVolume is a small odd-sized volume in every sample type.
var testSize = [3]int{11, 7, 5}

func header(t volume.SampleType) volume.Header {
	return volume.Header{NX: testSize[0], NY: testSize[1], NZ: testSize[2], Type: t,
		Spacing: [3]float64{0.65, 0.65, 2}, Unit: "um"}
}

// slices splits values into the volume's z-slices.
func slices(h volume.Header, values []float64) []*volume.Slice {
	var out []*volume.Slice
	n := h.SliceLen()
	for z := 0; z < h.NZ; z++ {
		s := volume.NewSlice(h.NX, h.NY, h.Type)
		for i := 0; i < n; i++ {
			s.Set(i, values[z*n+i])
		}
		out = append(out, s)
	}
	return out
}

var orders = []struct {
	name  string
	order binary.ByteOrder
}{{"le", binary.LittleEndian}, {"be", binary.BigEndian}}

// TestWriteMatchesReferenceEncoding writes every sample type in both byte orders and
// compares the file byte for byte with the same values encoded by encoding/binary.
// expected: encoding/binary's LittleEndian/BigEndian encoders (Go standard library).
func TestWriteMatchesReferenceEncoding(t *testing.T) {
	dir := t.TempDir()
	for _, typ := range volume.SampleTypes {
		for _, o := range orders {
			t.Run(typ.String()+"/"+o.name, func(t *testing.T) {
				h := header(typ)
				values := sampleValues(typ, int(h.Voxels()), uint64(typ))
				path := filepath.Join(dir, typ.String()+"-"+o.name+".raw")
				w, err := Create(path, h, o.order, false)
				if err != nil {
					t.Fatal(err)
				}
				src := slices(h, values)
				before := bytes.Clone(src[0].Data)
				for _, s := range src {
					if err := w.WriteSlice(s); err != nil {
						t.Fatal(err)
					}
				}
				if err := w.Close(); err != nil {
					t.Fatal(err)
				}
				if !bytes.Equal(src[0].Data, before) {
					t.Error("WriteSlice modified its input")
				}
				got, err := os.ReadFile(path)
				if err != nil {
					t.Fatal(err)
				}
				if want := encodeRef(typ, o.order, values); !bytes.Equal(got, want) {
					t.Errorf("file differs from the reference encoding (%d vs %d bytes)", len(got), len(want))
				}
			})
		}
	}
}

// TestReadReferenceEncoding reads files made by encoding/binary, in every sample type,
// byte order and header offset, with and without trailing bytes, and checks every
// sample. expected: the values encoded by encoding/binary (Go standard library).
func TestReadReferenceEncoding(t *testing.T) {
	dir := t.TempDir()
	for _, typ := range volume.SampleTypes {
		for _, o := range orders {
			for _, offset := range []int64{0, 3, 512} {
				for _, extra := range []int{0, 5} {
					name := fmt.Sprintf("%v/%s/offset%d/extra%d", typ, o.name, offset, extra)
					t.Run(name, func(t *testing.T) {
						h := header(typ)
						values := sampleValues(typ, int(h.Voxels()), 99+uint64(typ))
						data := append(bytes.Repeat([]byte{0xA5}, int(offset)), encodeRef(typ, o.order, values)...)
						data = append(data, make([]byte, extra)...)
						path := filepath.Join(dir, strings.ReplaceAll(name, "/", "-")+".raw")
						if err := os.WriteFile(path, data, 0o644); err != nil {
							t.Fatal(err)
						}
						r, err := Open(path, h, o.order, offset)
						if err != nil {
							t.Fatal(err)
						}
						defer r.Close()
						if r.Extra() != int64(extra) {
							t.Errorf("Extra = %d, want %d", r.Extra(), extra)
						}
						if r.Header() != h {
							t.Errorf("Header = %+v, want %+v", r.Header(), h)
						}
						want := slices(h, values)
						s := new(volume.Slice)
						for z := range want {
							if err := r.ReadSlice(s); err != nil {
								t.Fatalf("slice %d: %v", z, err)
							}
							if !bytes.Equal(s.Data, want[z].Data) {
								t.Fatalf("slice %d differs", z)
							}
						}
						if err := r.ReadSlice(s); err != io.EOF {
							t.Errorf("after the last slice: %v, want io.EOF", err)
						}
					})
				}
			}
		}
	}
}

// TestRoundTrip writes and reads back every sample type × byte order (the reader and
// the writer must agree; the two tests above tie each to encoding/binary, the one
// beside them to NumPy).
func TestRoundTrip(t *testing.T) {
	dir := t.TempDir()
	for _, typ := range volume.SampleTypes {
		for _, o := range orders {
			h := header(typ)
			h.NX, h.NY, h.NZ = 64, 33, 9
			values := sampleValues(typ, int(h.Voxels()), 5)
			src := slices(h, values)
			path := filepath.Join(dir, typ.String()+o.name+".raw")
			w, err := Create(path, h, o.order, false)
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
			r, err := Open(path, h, o.order, 0)
			if err != nil {
				t.Fatal(err)
			}
			s := new(volume.Slice)
			for z := range src {
				if err := r.ReadSlice(s); err != nil || !bytes.Equal(s.Data, src[z].Data) {
					t.Fatalf("%v %s slice %d: err %v or data differ", typ, o.name, z, err)
				}
			}
			r.Close()
		}
	}
}

// TestSeekSlice seeks back and forth in a big-endian file with a 3-byte header.
// expected: the values encoded by encoding/binary (Go standard library).
func TestSeekSlice(t *testing.T) {
	h := header(volume.Int16)
	values := sampleValues(h.Type, int(h.Voxels()), 3)
	path := filepath.Join(t.TempDir(), "seek.raw")
	if err := os.WriteFile(path, append([]byte("HDR"), encodeRef(h.Type, binary.BigEndian, values)...), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path, h, binary.BigEndian, 3)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	want := slices(h, values)
	s := new(volume.Slice)
	for _, z := range []int{3, 0, 4, 1, 1, 2} {
		if err := r.SeekSlice(z); err != nil {
			t.Fatal(err)
		}
		if err := r.ReadSlice(s); err != nil || !bytes.Equal(s.Data, want[z].Data) {
			t.Fatalf("after SeekSlice(%d): err %v or wrong data", z, err)
		}
	}
	// Reading on after a seek continues with the next slice.
	if err := r.ReadSlice(s); err != nil || !bytes.Equal(s.Data, want[3].Data) {
		t.Fatalf("slice after seek: err %v or wrong data", err)
	}
	if err := r.SeekSlice(h.NZ); err != nil {
		t.Fatal(err)
	}
	if err := r.ReadSlice(s); err != io.EOF {
		t.Errorf("read after SeekSlice(NZ) = %v, want io.EOF", err)
	}
	for _, z := range []int{-1, h.NZ + 1} {
		if err := r.SeekSlice(z); err == nil {
			t.Errorf("SeekSlice(%d) succeeded", z)
		}
	}
}

// TestBadDescriptions checks the errors for files that cannot hold what they are said
// to hold: one line, naming the file and the sizes, without allocating what the
// description claims (common practice: validate sizes before allocating).
func TestBadDescriptions(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "scan.raw")
	if err := os.WriteFile(path, make([]byte, 1000), 0o644); err != nil {
		t.Fatal(err)
	}
	u16 := volume.Header{NX: 10, NY: 10, NZ: 6, Type: volume.Uint16} // 1200 bytes
	cases := []struct {
		name   string
		h      volume.Header
		offset int64
		want   []string // substrings of the message
	}{
		{"short", u16, 0, []string{"scan.raw", "1000 bytes", "1200 bytes", "too short"}},
		{"offset makes it short", volume.Header{NX: 10, NY: 10, NZ: 5, Type: volume.Uint16}, 1, []string{"1000 bytes", "offset of 1"}},
		{"offset past end", volume.Header{NX: 1, NY: 1, NZ: 1, Type: volume.Uint8}, 5000, []string{"offset of 5000"}},
		{"offset near 2^63", volume.Header{NX: 1, NY: 1, NZ: 1, Type: volume.Uint8}, math.MaxInt64, []string{"too short"}},
		{"negative offset", u16, -4, []string{"negative offset -4"}},
		{"2^40 voxels", volume.Header{NX: 1 << 14, NY: 1 << 13, NZ: 1 << 13, Type: volume.Float64}, 0, []string{"too short", "8796093022208 bytes"}},
		{"beyond 2^40 voxels", volume.Header{NX: 1 << 20, NY: 1 << 12, NZ: 1 << 9, Type: volume.Uint8}, 0, []string{"exceeds 2^40"}},
		{"negative size", volume.Header{NX: -3, NY: 10, NZ: 10, Type: volume.Uint8}, 0, []string{"out of range"}},
		{"zero size", volume.Header{NX: 10, NY: 0, NZ: 10, Type: volume.Uint8}, 0, []string{"out of range"}},
		{"no type", volume.Header{NX: 10, NY: 10, NZ: 10}, 0, []string{"sample type"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			var before, after runtime.MemStats
			runtime.ReadMemStats(&before)
			start := time.Now()
			r, err := Open(path, c.h, binary.LittleEndian, c.offset)
			elapsed := time.Since(start)
			runtime.ReadMemStats(&after)
			if err == nil {
				r.Close()
				t.Fatal("Open succeeded")
			}
			msg := err.Error()
			if !strings.HasPrefix(msg, "raw: ") || strings.Contains(msg, "\n") {
				t.Errorf("message %q: want one line starting with \"raw: \"", msg)
			}
			for _, w := range append(c.want, path) {
				if !strings.Contains(msg, w) {
					t.Errorf("message %q lacks %q", msg, w)
				}
			}
			var fe *FormatError
			if !errors.As(err, &fe) {
				t.Errorf("%v is not a *FormatError", err)
			}
			if grew := after.TotalAlloc - before.TotalAlloc; grew > 1<<20 {
				t.Errorf("Open allocated %d bytes", grew)
			}
			if elapsed > time.Second {
				t.Errorf("Open took %v", elapsed)
			}
		})
	}
}

// TestFileShrinks reads a file truncated after Open: the error says so and wraps
// io.ErrUnexpectedEOF (the standard library's convention for a structure cut short).
func TestFileShrinks(t *testing.T) {
	h := header(volume.Float32)
	path := filepath.Join(t.TempDir(), "shrinks.raw")
	if err := os.WriteFile(path, make([]byte, h.Bytes()), 0o644); err != nil {
		t.Fatal(err)
	}
	r, err := Open(path, h, nil, 0)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	if err := os.Truncate(path, int64(h.SliceBytes())+10); err != nil {
		t.Fatal(err)
	}
	s := new(volume.Slice)
	if err := r.ReadSlice(s); err != nil {
		t.Fatal(err)
	}
	err = r.ReadSlice(s)
	if !errors.Is(err, io.ErrUnexpectedEOF) || !strings.Contains(err.Error(), "slice 1 of 5") {
		t.Errorf("got %v, want an unexpected EOF in slice 1", err)
	}
}

// TestWriterAtomic checks that nothing appears under the target's name unless Close
// succeeds after every slice, and that no temporary file is left behind.
// expected: the promise of issues 2 and 5 (atomic outputs), checked on the folder.
func TestWriterAtomic(t *testing.T) {
	h := header(volume.Uint16)
	src := slices(h, sampleValues(h.Type, int(h.Voxels()), 1))
	cases := []struct {
		name    string
		write   int  // slices to write
		abort   bool // call Abort instead of Close
		wantErr error
	}{
		{"none written", 0, false, volume.ErrShortVolume},
		{"short", 4, false, volume.ErrShortVolume},
		{"aborted", 5, true, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			dir := t.TempDir()
			path := filepath.Join(dir, "out.raw")
			w, err := Create(path, h, binary.BigEndian, false)
			if err != nil {
				t.Fatal(err)
			}
			for _, s := range src[:c.write] {
				if err := w.WriteSlice(s); err != nil {
					t.Fatal(err)
				}
			}
			if c.abort {
				err = w.Abort()
			} else {
				err = w.Close()
				if !errors.Is(err, volume.ErrShortVolume) || !strings.Contains(err.Error(), "out.raw") {
					t.Errorf("Close = %v, want an error naming the file and wrapping ErrShortVolume", err)
				}
				err = w.Abort() // allowed after a failed Close
			}
			if err != nil {
				t.Errorf("Abort = %v", err)
			}
			if ents, _ := os.ReadDir(dir); len(ents) != 0 {
				t.Errorf("left behind: %v", ents)
			}
		})
	}
}

// TestWriterOverwriteAndMismatch: an existing output is kept without overwrite and
// replaced only on Close with it; slices of the wrong shape or type, or beyond NZ, are
// refused. expected: the promise of issue 5 (outputs are atomic, never replaced
// unless asked).
func TestWriterOverwriteAndMismatch(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out.raw")
	if err := os.WriteFile(path, []byte("old"), 0o644); err != nil {
		t.Fatal(err)
	}
	h := header(volume.Uint8)
	if _, err := Create(path, h, nil, false); !errors.Is(err, atomicfile.ErrExists) {
		t.Fatalf("Create over an existing file = %v, want ErrExists", err)
	}
	w, err := Create(path, h, nil, true)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.WriteSlice(volume.NewSlice(h.NX, h.NY, volume.Uint16)); err == nil {
		t.Error("a uint16 slice was accepted by a uint8 stack")
	}
	if err := w.WriteSlice(volume.NewSlice(h.NX+1, h.NY, h.Type)); err == nil {
		t.Error("a wider slice was accepted")
	}
	for z := 0; z < h.NZ; z++ {
		if err := w.WriteSlice(volume.NewSlice(h.NX, h.NY, h.Type)); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.WriteSlice(volume.NewSlice(h.NX, h.NY, h.Type)); err == nil {
		t.Error("a slice beyond NZ was accepted")
	}
	// The old file stays until Close commits.
	if b, _ := os.ReadFile(path); string(b) != "old" {
		t.Error("the existing file was replaced before Close")
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	if st, err := os.Stat(path); err != nil || st.Size() != h.Bytes() {
		t.Errorf("after Close: %v, size %v, want %d bytes", err, st, h.Bytes())
	}
	if err := w.Close(); err == nil {
		t.Error("second Close succeeded")
	}
	if err := w.Abort(); err != nil {
		t.Errorf("Abort after Close = %v", err)
	}
	if _, err := os.Stat(path); err != nil {
		t.Error("Abort after Close removed the committed file")
	}
}

func TestSwapBytes(t *testing.T) {
	// expected: the byte reversal of each sample, written out by hand.
	b := []byte{1, 2, 3, 4, 5, 6, 7, 8}
	for _, c := range []struct {
		size int
		want []byte
	}{
		{1, []byte{1, 2, 3, 4, 5, 6, 7, 8}},
		{2, []byte{2, 1, 4, 3, 6, 5, 8, 7}},
		{4, []byte{4, 3, 2, 1, 8, 7, 6, 5}},
		{8, []byte{8, 7, 6, 5, 4, 3, 2, 1}},
	} {
		got := bytes.Clone(b)
		swapBytes(got, c.size)
		if !bytes.Equal(got, c.want) {
			t.Errorf("size %d: %v, want %v", c.size, got, c.want)
		}
	}
}
