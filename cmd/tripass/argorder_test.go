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
	}
	for _, tt := range tests {
		t.Run(tt.cmd, func(t *testing.T) {
			var results [2][]byte
			for i := 0; i < 2; i++ {
				pos := []string{in}
				out := filepath.Join(dir, tt.cmd+string(rune('a'+i))+".tif")
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
