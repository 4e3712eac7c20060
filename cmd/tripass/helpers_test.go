package main

import (
	"encoding/json"
	"path/filepath"
	"testing"

	"github.com/tripass/tripass/internal/phantom"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

// writeStack writes src as a multi-page TIFF in dir and returns its path.
func writeStack(t *testing.T, dir, name string, src volume.Source) string {
	t.Helper()
	path := filepath.Join(dir, name)
	sink, err := tiffstack.Create(path, src.Header(), tiffstack.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := volume.Copy(sink, src, src.Header().Type, nil); err != nil {
		t.Fatal(err)
	}
	if err := sink.Close(); err != nil {
		t.Fatal(err)
	}
	return path
}

// rockStack writes a small phantom rock core (uint16, 6×6×10 µm) and returns its path.
func rockStack(t *testing.T, dir string) string {
	return writeStack(t, dir, "rock.tif", phantom.RockCore(23, 19, 11, [3]float64{6, 6, 10}, 1))
}

// readAll reads every voxel of the stack at path as float64.
func readAll(t *testing.T, path string) (volume.Header, []float64) {
	t.Helper()
	r, err := tiffstack.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	h := r.Header()
	s := &volume.Slice{}
	var out []float64
	for z := 0; z < h.NZ; z++ {
		if err := r.ReadSlice(s); err != nil {
			t.Fatal(err)
		}
		for i := 0; i < s.Len(); i++ {
			out = append(out, s.At(i))
		}
	}
	return h, out
}

func infoJSON(t *testing.T, args ...string) map[string]any {
	t.Helper()
	code, out, errs := runCLI(t, append([]string{"info", "--json"}, args...)...)
	if code != 0 {
		t.Fatalf("info exit %d: %s", code, errs)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil {
		t.Fatalf("info --json printed invalid JSON: %v\n%s", err, out)
	}
	return m
}
