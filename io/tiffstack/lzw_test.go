package tiffstack

import (
	"bytes"
	"fmt"
	"io"
	"math/rand/v2"
	"testing"

	"golang.org/x/image/tiff/lzw"
)

// lzwInputs are byte strings that reach every branch of the encoder: empty, one byte,
// runs long enough to fill the 4094-entry table many times (Clear codes), noise that
// widens codes to 12 bits, and lengths around each code-width switch.
func lzwInputs() map[string][]byte {
	rng := rand.New(rand.NewPCG(3, 4))
	noise := make([]byte, 300000)
	for i := range noise {
		noise[i] = byte(rng.Uint32())
	}
	smooth := make([]byte, 300000)
	for i := range smooth {
		smooth[i] = byte(i/97) + byte(rng.IntN(3))
	}
	in := map[string][]byte{
		"empty":  {},
		"one":    {42},
		"zeros":  make([]byte, 1<<20),
		"noise":  noise,
		"smooth": smooth,
	}
	for _, n := range []int{253, 254, 255, 256, 257, 510, 511, 512, 1022, 1023, 1024, 2046, 2047, 2048, 4093, 4094, 4095, 4096, 8191} {
		in[fmt.Sprintf("noise%d", n)] = noise[:n]
		// Distinct codes appear one per input byte pair in noise, so code-width
		// switches happen near these many codes; vary the length around them.
		in[fmt.Sprintf("noise2x%d", n)] = noise[:2*n]
	}
	return in
}

// TestLZWRoundTrip encodes with our encoder and decodes with golang.org/x/image's TIFF
// LZW reader (MSB first, early change), the decoder this package reads with. Expected:
// the input, and the EndOfInformation code where the reader wants it (it reports
// io.EOF, not an error, after the data).
func TestLZWRoundTrip(t *testing.T) {
	var e lzwEncoder
	for name, src := range lzwInputs() {
		enc := e.encode(nil, src)
		r := lzw.NewReader(bytes.NewReader(enc), lzw.MSB, 8)
		got, err := io.ReadAll(r)
		if err != nil {
			t.Errorf("%s: decoding: %v", name, err)
			continue
		}
		if !bytes.Equal(got, src) {
			t.Errorf("%s: decoded %d bytes, want %d", name, len(got), len(src))
		}
		// Worst-case growth bound used for the BigTIFF decision (pageBound).
		if n := len(src); len(enc) > n*3/2+n/1024+16 {
			t.Errorf("%s: %d bytes encode to %d, beyond the bound", name, n, len(enc))
		}
	}
}

func BenchmarkLZWEncode(b *testing.B) {
	src := lzwInputs()["smooth"]
	var e lzwEncoder
	var dst []byte
	b.SetBytes(int64(len(src)))
	for b.Loop() {
		dst = e.encode(dst[:0], src)
	}
}
