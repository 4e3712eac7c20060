package main

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestInfoJSONFields(t *testing.T) {
	dir := t.TempDir()
	path := rockStack(t, dir)
	m := infoJSON(t, path, "--stats")
	size := m["size"].([]any)
	if size[0].(float64) != 23 || size[1].(float64) != 19 || size[2].(float64) != 11 {
		t.Errorf("size = %v, want [23 19 11]", size)
	}
	if m["type"] != "uint16" || m["unit"] != "um" {
		t.Errorf("type %v unit %v, want uint16 um", m["type"], m["unit"])
	}
	sp := m["spacing"].([]any)
	if sp[0].(float64) != 6 || sp[2].(float64) != 10 {
		t.Errorf("spacing = %v, want [6 6 10]", sp)
	}
	// Statistics against an independent pass over the voxels.
	_, v := readAll(t, path)
	lo, hi, sum := math.Inf(1), math.Inf(-1), 0.0
	for _, x := range v {
		lo, hi, sum = math.Min(lo, x), math.Max(hi, x), sum+x
	}
	if m["min"].(float64) != lo || m["max"].(float64) != hi || math.Abs(m["mean"].(float64)-sum/float64(len(v))) > 1e-9*hi {
		t.Errorf("stats min %v max %v mean %v, want %v %v %v", m["min"], m["max"], m["mean"], lo, hi, sum/float64(len(v)))
	}
	if m["nan"].(float64) != 0 {
		t.Errorf("nan = %v", m["nan"])
	}
}

func TestInfoSpacingFlag(t *testing.T) {
	path := rockStack(t, t.TempDir())
	m := infoJSON(t, path, "--spacing", "0.65,0.65,2um")
	sp := m["spacing"].([]any)
	if sp[0].(float64) != 0.65 || sp[2].(float64) != 2 || m["unit"] != "um" {
		t.Errorf("spacing %v %v, want [0.65 0.65 2] um", sp, m["unit"])
	}
}

func TestInfoText(t *testing.T) {
	path := rockStack(t, t.TempDir())
	code, out, _ := runCLI(t, "info", path)
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	for _, want := range []string{"23 × 19 × 11", "uint16", "6 × 6 × 10 um"} {
		if !strings.Contains(out, want) {
			t.Errorf("info output lacks %q:\n%s", want, out)
		}
	}
}

func TestInfoBadInput(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "broken.tif")
	os.WriteFile(bad, []byte("II*\x00\xff\xff\xff\x00"), 0o644)
	tests := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"missing file", []string{"info", filepath.Join(dir, "none.tif")}, ExitIO, "none.tif"},
		{"broken TIFF", []string{"info", bad}, ExitInput, "broken.tif"},
		{"no argument", []string{"info"}, ExitUsage, "STACK"},
		{"unknown extension", []string{"info", filepath.Join(dir, "a.xyz")}, ExitUsage, "a.xyz"},
		{"raw without size", []string{"info", filepath.Join(dir, "a.raw")}, ExitUsage, "--raw-size"},
		{"misspelt flag", []string{"info", "--stat", bad}, ExitUsage, "did you mean --stats"},
	}
	os.WriteFile(filepath.Join(dir, "a.raw"), make([]byte, 8), 0o644)
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			code, _, errs := runCLI(t, tt.args...)
			if code != tt.code {
				t.Errorf("exit %d, want %d (%s)", code, tt.code, errs)
			}
			if !strings.Contains(errs, tt.want) || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
				t.Errorf("stderr %q: want one line mentioning %q", errs, tt.want)
			}
		})
	}
}
