package npy

import (
	"bytes"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// FuzzRead feeds arbitrary bytes to Read, seeded with the NumPy-written files in
// testdata. Read must not panic or allocate what a header merely claims; whatever it
// accepts must hold as many values as its shape, and survive a write and read back.
func FuzzRead(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join("testdata", "*.npy"))
	for _, p := range files {
		b, err := os.ReadFile(p)
		if err == nil && len(b) < 4096 {
			f.Add(b)
		}
	}
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := Read(bytes.NewReader(b))
		if err != nil {
			return
		}
		if a.Len() != len(a.Data) {
			t.Fatalf("shape %v holds %d values, got %d", a.Shape, a.Len(), len(a.Data))
		}
		var buf bytes.Buffer
		if err := Write(&buf, a); err != nil {
			t.Fatal(err)
		}
		c, err := Read(&buf)
		if err != nil {
			t.Fatal(err)
		}
		if len(c.Data) != len(a.Data) {
			t.Fatalf("round trip: %d values, want %d", len(c.Data), len(a.Data))
		}
		for i := range a.Data {
			if math.Float64bits(a.Data[i]) != math.Float64bits(c.Data[i]) {
				t.Fatalf("round trip: value %d is %v, want %v", i, c.Data[i], a.Data[i])
			}
		}
	})
}
