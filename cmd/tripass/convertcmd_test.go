package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestConvertRoundTripsEveryLayout(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	_, want := readAll(t, src)
	outs := []struct {
		path  string
		extra []string
	}{
		{filepath.Join(dir, "a.tif"), []string{"--compress", "lzw"}},
		{filepath.Join(dir, "b.tif"), []string{"--compress", "deflate", "--bigtiff"}},
		{filepath.Join(dir, "slices") + "/", nil},
		{filepath.Join(dir, "c.raw"), nil},
		{filepath.Join(dir, "d.nii.gz"), nil},
	}
	for _, o := range outs {
		code, _, errs := runCLI(t, append([]string{"convert", src, o.path, "--quiet"}, o.extra...)...)
		if code != 0 {
			t.Fatalf("convert to %s: exit %d: %s", o.path, code, errs)
		}
		back := filepath.Join(dir, "back-"+strings.Trim(filepath.Base(o.path), "/")+".tif")
		args := []string{"convert", o.path, back, "--quiet"}
		if strings.HasSuffix(o.path, ".raw") {
			args = append(args, "--raw-size", "23,19,11", "--raw-type", "uint16")
		}
		if code, _, errs := runCLI(t, args...); code != 0 {
			t.Fatalf("convert back from %s: exit %d: %s", o.path, code, errs)
		}
		_, got := readAll(t, back)
		if len(got) != len(want) {
			t.Fatalf("%s: %d voxels, want %d", o.path, len(got), len(want))
		}
		for i := range got {
			if got[i] != want[i] {
				t.Fatalf("%s: voxel %d = %v, want %v", o.path, i, got[i], want[i])
			}
		}
	}
}

func TestConvertTypeClampsAndReports(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	out := filepath.Join(dir, "u8.tif")
	code, _, errs := runCLI(t, "convert", src, out, "--type", "uint8")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(errs, "clamped") {
		t.Errorf("stderr does not report clamping: %q", errs)
	}
	h, v := readAll(t, out)
	if h.Type.String() != "uint8" {
		t.Errorf("type %v", h.Type)
	}
	for _, x := range v {
		if x < 0 || x > 255 {
			t.Fatalf("value %v outside uint8", x)
		}
	}
}

func TestConvertRefusesToOverwriteInputOrExisting(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	link := filepath.Join(dir, "link.tif")
	os.Symlink(src, link)
	for _, out := range []string{src, link, filepath.Join(dir, ".", "rock.tif")} {
		code, _, errs := runCLI(t, "convert", src, out)
		if code != ExitUsage || !strings.Contains(errs, "input") {
			t.Errorf("convert %s %s: exit %d %q, want refusal", src, out, code, errs)
		}
	}
	other := filepath.Join(dir, "other.tif")
	os.WriteFile(other, []byte("keep"), 0o644)
	if code, _, _ := runCLI(t, "convert", src, other); code == 0 {
		t.Error("convert replaced an existing output without --overwrite")
	}
	if b, _ := os.ReadFile(other); string(b) != "keep" {
		t.Error("existing output was modified")
	}
	if code, _, errs := runCLI(t, "convert", src, other, "--overwrite"); code != 0 {
		t.Errorf("--overwrite: exit %d %s", code, errs)
	}
}

func TestConvertFailureLeavesNoOutput(t *testing.T) {
	dir := t.TempDir()
	src := rockStack(t, dir)
	b, _ := os.ReadFile(src)
	trunc := filepath.Join(dir, "trunc.tif")
	os.WriteFile(trunc, b[:len(b)*2/3], 0o644)
	out := filepath.Join(dir, "out.tif")
	code, _, errs := runCLI(t, "convert", trunc, out)
	if code == 0 {
		t.Fatal("converting a truncated file succeeded")
	}
	if !strings.Contains(errs, "trunc.tif") {
		t.Errorf("error does not name the file: %q", errs)
	}
	if ents, _ := filepath.Glob(filepath.Join(dir, "*out.tif*")); len(ents) != 0 {
		t.Errorf("left behind: %v", ents)
	}
}
