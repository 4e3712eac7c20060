package nifti

import (
	"bytes"
	"compress/flate"
	"compress/gzip"
	"errors"
	"io"
	"math/rand/v2"
	"testing"
)

// TestGzipStreamIsOneMember compresses inputs around the chunk size, written in odd
// pieces, and decompresses them with the standard library's compress/gzip (RFC 1952)
// reading a single member only: the output must be one member holding exactly the
// input, with a verified CRC-32 and length.
func TestGzipStreamIsOneMember(t *testing.T) {
	for _, workers := range []int{1, 2, 5} {
		gzipWorkers = workers
		checkGzipStream(t)
	}
	gzipWorkers = 0
}

func checkGzipStream(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	for _, n := range []int{0, 1, 1000, gzipChunk - 1, gzipChunk, gzipChunk + 1, 3*gzipChunk + 17, 9 * gzipChunk} {
		in := make([]byte, n)
		for i := range in {
			in[i] = byte(i/300) ^ byte(rng.IntN(4)) // compressible, not trivially
		}
		var out bytes.Buffer
		s, err := newGzipStream(&out, flate.BestSpeed)
		if err != nil {
			t.Fatal(err)
		}
		for p := in; len(p) > 0; {
			k := min(len(p), 1+rng.IntN(200000))
			if _, err := s.Write(p[:k]); err != nil {
				t.Fatal(err)
			}
			p = p[k:]
		}
		if err := s.Close(); err != nil {
			t.Fatal(err)
		}
		b := out.Bytes()
		if len(b) < 18 || b[0] != 0x1f || b[1] != 0x8b || b[2] != 8 || b[3] != 0 || b[9] != 255 {
			t.Fatalf("%d bytes: bad gzip header % x", n, b[:min(10, len(b))])
		}
		br := bytes.NewReader(b)
		zr, err := gzip.NewReader(br) // a bytes.Reader is read byte by byte: no read-ahead
		if err != nil {
			t.Fatal(err)
		}
		zr.Multistream(false)
		got, err := io.ReadAll(zr)
		if err != nil {
			t.Fatalf("%d bytes: %v", n, err)
		}
		if !bytes.Equal(got, in) {
			t.Fatalf("%d bytes: decompressed %d bytes that differ", n, len(got))
		}
		if br.Len() != 0 {
			t.Errorf("%d bytes: %d bytes follow the gzip member", n, br.Len())
		}
	}
}

type failingWriter struct{ left int }

func (w *failingWriter) Write(p []byte) (int, error) {
	if len(p) > w.left {
		return 0, errors.New("disk full")
	}
	w.left -= len(p)
	return len(p), nil
}

// TestGzipStreamErrors: a failing output is reported and no goroutine is left
// waiting (the test would hang), whether the stream is closed or aborted.
func TestGzipStreamErrors(t *testing.T) {
	data := make([]byte, 5*gzipChunk)
	for i := range data {
		data[i] = byte(i * 7 / 5)
	}
	for _, abort := range []bool{false, true} {
		s, err := newGzipStream(&failingWriter{left: 100}, flate.BestSpeed)
		if err != nil {
			t.Fatal(err)
		}
		var werr error
		for i := 0; i < 20 && werr == nil; i++ {
			_, werr = s.Write(data)
		}
		if abort {
			s.Abort()
			continue
		}
		if err := s.Close(); err == nil && werr == nil {
			t.Error("a failing output went unreported")
		}
	}
	// A header that cannot be written fails at once.
	if _, err := newGzipStream(&failingWriter{left: 3}, flate.BestSpeed); err == nil {
		t.Error("header write failure went unreported")
	}
}
