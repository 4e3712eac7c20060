package main

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

// Every command accepts its flags before and after its positional arguments.
func TestFlagsOnEitherSideOfArguments(t *testing.T) {
	dir := t.TempDir()
	in := rockStack(t, dir)
	kernel := filepath.Join(dir, "k.npy")
	if code, _, errs := runCLI(t, "kernel", "make", "gaussian", "--sigma", "1,1,2", "-o", kernel, "--quiet"); code != 0 {
		t.Fatalf("kernel make: %s", errs)
	}
	tests := []struct {
		cmd   string
		flags []string
		out   bool // the command writes OUT
	}{
		{"info", []string{"--json", "--spacing", "1,1,2um"}, false},
		{"convert", []string{"--type", "float32", "--compress", "deflate"}, true},
		{"smooth", []string{"--sigma", "1.5", "--edge", "reflect", "--quiet"}, true},
		{"gradient", []string{"--component", "z", "--threads", "1", "--quiet"}, true},
		{"laplace", []string{"--sigma", "1", "--quiet"}, true},
		{"dog", []string{"--sigma", "1", "--sigma2", "2", "--quiet"}, true},
		{"convolve", []string{"--kernel", kernel, "--tolerance", "1e-3", "--quiet"}, true},
		{"preview", []string{"--sections", "xy,xz", "--width", "64", "--quiet"}, true},
	}
	for _, tt := range tests {
		t.Run(tt.cmd, func(t *testing.T) {
			var results [2][]byte
			for i := 0; i < 2; i++ {
				pos := []string{in}
				ext := ".tif"
				if tt.cmd == "preview" {
					ext = ".png"
				}
				out := filepath.Join(dir, tt.cmd+string(rune('a'+i))+ext)
				if tt.out {
					pos = append(pos, out)
				}
				var args []string
				if i == 0 {
					args = append(append([]string{tt.cmd}, tt.flags...), pos...)
				} else {
					args = append(append([]string{tt.cmd}, pos...), tt.flags...)
				}
				code, stdout, errs := runCLI(t, args...)
				if code != 0 {
					t.Fatalf("%v: exit %d: %s", args, code, errs)
				}
				results[i] = []byte(stdout)
				if tt.out {
					b, err := os.ReadFile(out)
					if err != nil {
						t.Fatal(err)
					}
					results[i] = b
				}
			}
			if !bytes.Equal(results[0], results[1]) {
				t.Errorf("flags before and after the arguments gave different results")
			}
		})
	}
}

func TestJoinFlagsOnEitherSide(t *testing.T) {
	dir := t.TempDir()
	in := rockStack(t, dir)
	out := filepath.Join(dir, "s.tif")
	var parts []string
	for _, shard := range []string{"1/2", "2/2"} {
		if code, _, errs := runCLI(t, "smooth", in, out, "--sigma", "1", "--shard", shard, "--quiet"); code != 0 {
			t.Fatalf("shard %s: %s", shard, errs)
		}
	}
	parts = []string{out + ".part-0001-of-0002.tif", out + ".part-0002-of-0002.tif"}
	a, b := filepath.Join(dir, "a.tif"), filepath.Join(dir, "b.tif")
	if code, _, errs := runCLI(t, append(append([]string{"join", "--quiet"}, parts...), a)...); code != 0 {
		t.Fatalf("join with flags first: %s", errs)
	}
	if code, _, errs := runCLI(t, append(append([]string{"join"}, parts...), b, "--quiet")...); code != 0 {
		t.Fatalf("join with flags last: %s", errs)
	}
	ba, _ := os.ReadFile(a)
	bb, _ := os.ReadFile(b)
	if !bytes.Equal(ba, bb) {
		t.Error("flags before and after the arguments gave different joins")
	}
}
