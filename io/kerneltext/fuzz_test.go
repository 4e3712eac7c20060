package kerneltext

import (
	"bytes"
	"os"
	"path/filepath"
	"slices"
	"testing"
)

// FuzzRead feeds arbitrary text to Read, seeded with testdata/*.txt. Whatever Read
// accepts must fill its shape, stay within the limits, and read back unchanged after
// Write.
func FuzzRead(f *testing.F) {
	files, _ := filepath.Glob(filepath.Join("testdata", "*.txt"))
	for _, p := range files {
		if b, err := os.ReadFile(p); err == nil {
			f.Add(b)
		}
	}
	f.Add([]byte("1 2\n3 4\n\n5 6\n"))
	f.Fuzz(func(t *testing.T, b []byte) {
		a, err := Read(bytes.NewReader(b))
		if err != nil {
			return
		}
		if len(a.Shape) != 3 || a.Shape[0]*a.Shape[1]*a.Shape[2] != len(a.Data) || len(a.Data) > MaxTaps {
			t.Fatalf("shape %v with %d values", a.Shape, len(a.Data))
		}
		var buf bytes.Buffer
		if err := Write(&buf, a); err != nil {
			t.Fatal(err)
		}
		c, err := Read(&buf)
		if err != nil {
			t.Fatal(err)
		}
		if !slices.Equal(c.Shape, a.Shape) || !slices.Equal(c.Data, a.Data) {
			t.Fatalf("round trip changed %v %v into %v %v", a.Shape, a.Data, c.Shape, c.Data)
		}
	})
}
