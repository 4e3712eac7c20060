package main

import (
	"path/filepath"
	"strings"
	"testing"
)

func TestParseByteSize(t *testing.T) {
	tests := []struct {
		in   string
		want int64
		ok   bool
	}{
		{"4GiB", 4 << 30, true},
		{"800MiB", 800 << 20, true},
		{"1.5g", 3 << 29, true},
		{"12345", 12345, true},
		{"2 kb", 2048, true},
		{"-1G", 0, false},
		{"lots", 0, false},
	}
	for _, tt := range tests {
		got, err := parseByteSize(tt.in)
		if (err == nil) != tt.ok || got != tt.want {
			t.Errorf("parseByteSize(%q) = %d, %v; want %d ok=%v", tt.in, got, err, tt.want, tt.ok)
		}
	}
}

// A run whose buffers would exceed --max-memory stops before allocating, with a clear
// line and nothing under the output name.
func TestMaxMemoryRefusesBeforeAllocating(t *testing.T) {
	dir := t.TempDir()
	in := rockStack(t, dir)
	out := filepath.Join(dir, "out.tif")
	code, _, errs := runCLI(t, "smooth", in, out, "--sigma", "3", "--max-memory", "10KiB", "--quiet")
	if code == 0 || !strings.Contains(errs, "of buffers") || !strings.Contains(errs, "--max-memory") || strings.Count(strings.TrimSpace(errs), "\n") != 0 {
		t.Fatalf("exit %d, stderr %q: want a one-line refusal", code, errs)
	}
	if m, _ := filepath.Glob(filepath.Join(dir, "*out.tif*")); len(m) != 0 {
		t.Errorf("left behind: %v", m)
	}
}
