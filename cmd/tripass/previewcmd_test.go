package main

import (
	"encoding/json"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tripass/tripass/internal/phantom"
	"github.com/tripass/tripass/internal/preview"
	"github.com/tripass/tripass/volume"
)

// pointStack is a float32 volume that is zero but for one bright voxel, generated
// slice by slice.
type pointStack struct {
	h     volume.Header
	at    [3]int
	value float32
	z     int
}

func (p *pointStack) Header() volume.Header { return p.h }
func (p *pointStack) Close() error          { return nil }
func (p *pointStack) ReadSlice(dst *volume.Slice) error {
	if p.z >= p.h.NZ {
		return io.EOF
	}
	dst.Reset(p.h.NX, p.h.NY, volume.Float32)
	clear(dst.Data)
	if p.z == p.at[2] {
		dst.Set(p.at[1]*p.h.NX+p.at[0], float64(p.value))
	}
	p.z++
	return nil
}

func decodePNG(t *testing.T, path string) image.Image {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return img
}

// TestPreviewDrawsWhatTheLibraryDraws runs the command on a stack with one bright voxel
// and anisotropic spacing given on the command line, and checks the PNG pixel for pixel
// against internal/preview fed the same sections (whose own tests check the layout and
// where the voxel lands), and that the bright voxel shows in all three sections.
func TestPreviewDrawsWhatTheLibraryDraws(t *testing.T) {
	dir := t.TempDir()
	at := [3]int{6, 9, 4}
	src := &pointStack{h: volume.Header{NX: 20, NY: 16, NZ: 10, Type: volume.Float32}, at: at, value: 1000}
	stack := writeStack(t, dir, "point.tif", src)
	out := filepath.Join(dir, "point.png")
	code, _, errs := runCLI(t, "preview", stack, out, "--at", "6,9,4", "--spacing", "1,1,3um",
		"--width", "200", "--percentiles", "0,100")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if !strings.Contains(errs, "through voxel (6, 9, 4)") || !strings.Contains(errs, "0.1 µm per pixel") {
		t.Errorf("note does not give the point and the scale: %q", errs)
	}
	got := decodePNG(t, out)

	src.z = 0
	src.h.Spacing, src.h.Unit = [3]float64{1, 1, 3}, "um"
	secs, err := preview.ReadSections(src, at, nil)
	if err != nil {
		t.Fatal(err)
	}
	want, lay, err := preview.Render([]*preview.Sections{secs}, preview.Options{Width: 200,
		Percentiles: [2]float64{0, 100}, Titles: []string{"point.tif"}})
	if err != nil {
		t.Fatal(err)
	}
	if got.Bounds() != want.Bounds() {
		t.Fatalf("preview is %v, want %v", got.Bounds(), want.Bounds())
	}
	for y := 0; y < want.Bounds().Dy(); y++ {
		for x := 0; x < want.Bounds().Dx(); x++ {
			g, _, _, _ := got.At(x, y).RGBA()
			if uint8(g>>8) != want.GrayAt(x, y).Y {
				t.Fatalf("pixel (%d,%d) is %d, want %d", x, y, g>>8, want.GrayAt(x, y).Y)
			}
		}
	}
	// The xz section of 3 µm slices over 1 µm columns is three times as tall per voxel.
	xz := lay.Panels[0][1]
	if r := float64(xz.Dy()) / float64(xz.Dx()); r < 1.45 || r > 1.55 {
		t.Errorf("xz panel %v: height/width %.3f, want 10·3/(20·1) = 1.5", xz, r)
	}
	for k, r := range lay.Panels[0] {
		peak := uint8(0)
		for y := r.Min.Y; y < r.Max.Y; y++ {
			for x := r.Min.X; x < r.Max.X; x++ {
				peak = max(peak, want.GrayAt(x, y).Y)
			}
		}
		if peak < 200 {
			t.Errorf("section %d: brightest grey %d, the voxel did not show", k, peak)
		}
	}
}

func TestPreviewCompareAndPhysicalPoint(t *testing.T) {
	dir := t.TempDir()
	before := writeStack(t, dir, "rock.tif", phantom.RockCore(40, 36, 20, [3]float64{6, 6, 10}, 2))
	after := filepath.Join(dir, "rock-smooth.tif")
	if code, _, errs := runCLI(t, "smooth", before, after, "--sigma", "12um", "--quiet"); code != 0 {
		t.Fatalf("smooth: exit %d: %s", code, errs)
	}
	one := filepath.Join(dir, "one.png")
	two := filepath.Join(dir, "two.png")
	// 60 µm along x and y is voxel 10; 100 µm along z is voxel 10.
	code, _, errs := runCLI(t, "preview", before, one, "--at", "60,60,100um", "--spacing", "6,6,10um")
	if code != 0 || !strings.Contains(errs, "through voxel (10, 10, 10)") {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if code, _, errs := runCLI(t, "preview", before, two, "--compare", after, "--at", "10,10,10"); code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	w1, w2 := decodePNG(t, one).Bounds().Dx(), decodePNG(t, two).Bounds().Dx()
	if w2 < 2*w1-20 {
		t.Errorf("compare preview is %d pixels wide, a single one %d: want two columns", w2, w1)
	}
	for _, p := range []string{one, two} {
		if st, _ := os.Stat(p); st.Size() > 200<<10 {
			t.Errorf("%s is %d bytes, want a small PNG", p, st.Size())
		}
	}
}

func TestPreviewErrors(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(24, 20, 12, [3]float64{6, 6, 10}, 1))
	other := writeStack(t, dir, "other.tif", phantom.RockCore(24, 20, 13, [3]float64{6, 6, 10}, 1))
	existing := filepath.Join(dir, "exists.png")
	if err := os.WriteFile(existing, []byte("not yet a preview"), 0o644); err != nil {
		t.Fatal(err)
	}
	out := filepath.Join(dir, "out.png")
	tests := []struct {
		name string
		args []string
		code int
		msg  string // part of the error line
	}{
		{"no output", []string{stack}, ExitUsage, "takes STACK and OUT.png"},
		{"not a png", []string{stack, filepath.Join(dir, "out.tif")}, ExitUsage, "ending in .png"},
		{"missing input", []string{filepath.Join(dir, "none.tif"), out}, ExitIO, "none.tif"},
		{"two numbers", []string{stack, out, "--at", "1,2"}, ExitUsage, "--at"},
		{"outside", []string{stack, out, "--at", "24,0,0"}, ExitUsage, "outside the stack"},
		{"fraction of a voxel", []string{stack, out, "--at", "1.5,2,3"}, ExitUsage, "whole numbers"},
		{"percentiles reversed", []string{stack, out, "--percentiles", "99,1"}, ExitUsage, "LOW < HIGH"},
		{"one percentile", []string{stack, out, "--percentiles", "5"}, ExitUsage, "LOW,HIGH"},
		{"negative width", []string{stack, out, "--width", "-5"}, ExitUsage, "--width"},
		{"unknown section", []string{stack, out, "--sections", "xy,xw"}, ExitUsage, "xw"},
		{"own contrast alone", []string{stack, out, "--own-contrast"}, ExitUsage, "--compare"},
		{"different sizes", []string{stack, out, "--compare", other}, ExitUsage, "same size"},
		{"exists", []string{stack, existing}, ExitUsage, "already exists"},
		{"bad log", []string{stack, out, "--log", "xml"}, ExitUsage, "text or json"},
		// A wrong flag name suggests the nearest one (exit.go, nearestFlag).
		{"typo", []string{stack, out, "--widht", "300"}, ExitUsage, "did you mean --width?"},
		{"typo 2", []string{stack, out, "--percentile", "1,99"}, ExitUsage, "did you mean --percentiles?"},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			code, _, errs := runCLI(t, append([]string{"preview"}, tt.args...)...)
			if code != tt.code || !strings.Contains(errs, tt.msg) {
				t.Errorf("exit %d, stderr %q; want exit %d and %q", code, errs, tt.code, tt.msg)
			}
			if strings.Count(strings.TrimSpace(errs), "\n") > 0 {
				t.Errorf("error is more than one line: %q", errs)
			}
			if _, err := os.Stat(out); err == nil {
				t.Errorf("a failed run left %s", out)
			}
		})
	}
	if b, _ := os.ReadFile(existing); string(b) != "not yet a preview" {
		t.Error("an existing output was replaced without --overwrite")
	}
	if code, _, errs := runCLI(t, "preview", stack, existing, "--overwrite", "--quiet"); code != 0 || errs != "" {
		t.Errorf("--overwrite --quiet: exit %d, stderr %q", code, errs)
	}
	entries, _ := os.ReadDir(dir)
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), ".tripass-part-") {
			t.Errorf("temporary file %s left behind", e.Name())
		}
	}
}

func TestPreviewXYSectionOnly(t *testing.T) {
	dir := t.TempDir()
	stack := writeStack(t, dir, "rock.tif", phantom.RockCore(32, 24, 40, [3]float64{6, 6, 10}, 1))
	out := filepath.Join(dir, "xy.png")
	code, _, errs := runCLI(t, "preview", stack, out, "--sections", "xy", "--width", "64", "--log", "json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	if strings.Contains(errs, `"event":"progress"`) || strings.Contains(errs, `"event":"summary"`) {
		t.Errorf("one slice read through a seek, yet a progress report: %q", errs)
	}
	// 32 × 6 µm across 64 pixels: 3 µm a pixel, so 24 × 6 µm is 48 pixels tall.
	img := decodePNG(t, out)
	if b := img.Bounds(); b.Dx() < 64 || b.Dy() < 48 {
		t.Errorf("xy preview is %v, want room for a 64×48 panel", b)
	}
}

func TestKernelInspectPlot(t *testing.T) {
	dir := t.TempDir()
	k := filepath.Join(dir, "tilted.npy")
	if code, _, errs := runCLI(t, "kernel", "make", "oriented-gaussian", "-o", k, "--sigma", "1,1,3", "--angles", "0,30,0"); code != 0 {
		t.Skipf("kernel make oriented-gaussian: exit %d: %s", code, errs)
	}
	plot := filepath.Join(dir, "tilted.png")
	code, out, errs := runCLI(t, "kernel", "inspect", k, "--tolerance", "1e-3", "--plot", plot, "--json")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errs)
	}
	var j map[string]any
	if err := json.Unmarshal([]byte(out), &j); err != nil {
		t.Errorf("--plot spoilt the --json output: %v", err)
	}
	img := decodePNG(t, plot)
	if img.Bounds().Dx() < 600 {
		t.Errorf("plot is only %v", img.Bounds())
	}
	if code, _, errs := runCLI(t, "kernel", "inspect", k, "--plot", plot); code != ExitUsage || !strings.Contains(errs, "exists") {
		t.Errorf("replacing a plot without --overwrite: exit %d, %q", code, errs)
	}
	if code, _, errs := runCLI(t, "kernel", "inspect", k, "--plot", filepath.Join(dir, "p.svg")); code != ExitUsage {
		t.Errorf("--plot p.svg: exit %d, %q; want a usage error", code, errs)
	}
}
