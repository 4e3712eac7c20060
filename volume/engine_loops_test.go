package volume

import (
	"encoding/binary"
	"math"
	"math/rand/v2"
	"testing"
)

// TestAxpyMatchesGeneric compares the engine's axpy (assembly through gonum by default)
// with the plain Go loop it stands for, on every length up to 70 and odd offsets.
func TestAxpyMatchesGeneric(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	src := make([]float32, 200)
	for i := range src {
		src[i] = rng.Float32()*2 - 1
	}
	for n := 0; n <= 70; n++ {
		for off := 0; off < 3; off++ {
			a := make([]float32, n)
			b := make([]float32, n)
			for i := range a {
				a[i] = rng.Float32()
				b[i] = a[i]
			}
			w := rng.Float32()*4 - 2
			axpy(a, src[off:], w)
			axpyGeneric(b, src[off:], w)
			for i := range a {
				// Equal unless a build fuses the multiply-add (GOAMD64=v3 may): then
				// within one rounding.
				if d := math.Abs(float64(a[i] - b[i])); d > 1e-7*(1+math.Abs(float64(b[i]))) {
					t.Fatalf("n=%d off=%d i=%d: %g, want %g", n, off, i, a[i], b[i])
				}
			}
		}
	}
}

func benchAxpy(b *testing.B, f func(dst, src []float32, w float32)) {
	x := make([]float32, 4096)
	y := make([]float32, 4096)
	b.SetBytes(int64(len(x)) * 4 * 2)
	for b.Loop() {
		f(y, x, 0.5)
	}
}

// BenchmarkAxpy: the engine's hot loop on an L1-resident block.
func BenchmarkAxpy(b *testing.B) {
	b.Run("engine", func(b *testing.B) { benchAxpy(b, axpy) })
	b.Run("generic", func(b *testing.B) { benchAxpy(b, axpyGeneric) })
}

// TestF32LE checks the float32 fast paths against encoding/binary.
func TestF32LE(t *testing.T) {
	vals := []float32{0, 1, -2.5, float32(math.Inf(1)), float32(math.NaN()), math.SmallestNonzeroFloat32, 3e38}
	b := make([]byte, 4*len(vals))
	putF32LE(b, vals)
	for i, v := range vals {
		if got := binary.LittleEndian.Uint32(b[4*i:]); got != math.Float32bits(v) {
			t.Errorf("putF32LE %d: %#x, want %#x", i, got, math.Float32bits(v))
		}
	}
	back := make([]float32, len(vals))
	f32LE(back, b)
	for i := range vals {
		if math.Float32bits(back[i]) != math.Float32bits(vals[i]) {
			t.Errorf("f32LE %d: %v, want %v", i, back[i], vals[i])
		}
	}
}

// TestEncodeRowMatchesFromFloat32: the engine's output encoders give the bytes and the
// clamp counts of Slice.FromFloat32 for every sample type, on values at every rounding
// and clamping boundary.
func TestEncodeRowMatchesFromFloat32(t *testing.T) {
	vals := []float32{0, 0.49999997, 0.5, 0.50000006, 1.5, 2.5, -0.5, -0.49999997, -1.5, -2.5,
		254.5, 255, 255.49998, 255.5, 256, 65534.5, 65535, 65535.4, 65535.5, 65536,
		-32768, -32768.4, -32768.5, -32769, 32767, 32767.4, 32767.5, 32768,
		float32(math.NaN()), float32(math.Inf(1)), float32(math.Inf(-1)), 1e30, -1e30, 3.3, -7.7}
	for _, typ := range SampleTypes {
		want := NewSlice(len(vals), 1, typ)
		wc := want.FromFloat32(vals)
		got := make([]byte, len(want.Data))
		gc := encodeRow(got, typ, vals)
		if gc != wc {
			t.Errorf("%v: %d clamped, want %d", typ, gc, wc)
		}
		for i := range vals {
			sz := typ.Size()
			if string(got[i*sz:(i+1)*sz]) != string(want.Data[i*sz:(i+1)*sz]) {
				t.Errorf("%v: %v encoded as %x, want %x", typ, vals[i], got[i*sz:(i+1)*sz], want.Data[i*sz:(i+1)*sz])
			}
		}
	}
}
