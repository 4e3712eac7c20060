package preview

import (
	"bytes"
	"flag"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/plot/vg"

	"github.com/tripass/tripass/tensor"
)

// -keep DIR writes the pictures the tests draw into DIR, for a person to look at.
var keepDir = flag.String("keep", "", "write the tests' PNG pictures into this folder")

func keep(t *testing.T, name string, b []byte) {
	if *keepDir == "" {
		return
	}
	if err := os.WriteFile(filepath.Join(*keepDir, name), b, 0o644); err != nil {
		t.Log(err)
	}
}

// hasColour reports whether img holds a pixel within 40 of c in every channel.
func hasColour(img image.Image, c color.Color) bool {
	r0, g0, b0, _ := c.RGBA()
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bb, _ := img.At(x, y).RGBA()
			if absDiff(r, r0) < 40<<8 && absDiff(g, g0) < 40<<8 && absDiff(bb, b0) < 40<<8 {
				return true
			}
		}
	}
	return false
}

func absDiff(a, b uint32) uint32 {
	if a > b {
		return a - b
	}
	return b - a
}

func TestKernelPlot(t *testing.T) {
	tests := []struct {
		name   string
		kernel *tensor.Dense
		tol    float64
		// ranks: how many n-mode singular values per axis are above the floor.
		ranks [3]int
	}{
		// The 7-point Laplacian has multilinear rank (2,2,2); n-mode singular values
		// 6.465961, 0.437433 and 0 in every mode (REFERENCES.md, checked numerically).
		{"laplace7", tensor.Laplace7(), 1e-6, [3]int{2, 2, 2}},
		// A Gaussian tilted 30° about y is not separable; its y mode stays rank one,
		// since the tilt mixes only x and z (REFERENCES.md: Tucker ranks (9,1,9)).
		{"tilted-psf", tensor.OrientedGaussian([3]float64{1, 1, 3}, [3]float64{0, math.Pi / 6, 0}, 4), 1e-3, [3]int{0, 1, 0}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			a, err := tensor.Analyze(tt.kernel, tensor.AnalyzeOptions{Tolerance: tt.tol, Seed: 1})
			if err != nil {
				t.Fatal(err)
			}
			f := FigureFromAnalysis(a, tt.name+".npy")
			chosen := 0
			for _, c := range f.Candidates {
				if c.Chosen {
					chosen++
				}
			}
			if chosen != 1 || len(f.Candidates) != len(a.Options) {
				t.Errorf("%d candidates with %d chosen; want %d with 1", len(f.Candidates), chosen, len(a.Options))
			}
			for axis, want := range tt.ranks {
				if want == 0 {
					continue
				}
				v := f.ModeValues[axis]
				got := 0
				for _, s := range v {
					if s > 1e-12*v[0] {
						got++
					}
				}
				if got != want {
					t.Errorf("%c: %d n-mode singular values above the noise, want %d (%v)", "xyz"[axis], got, want, v)
				}
			}
			var buf bytes.Buffer
			if err := WriteKernelPlot(&buf, f); err != nil {
				t.Fatal(err)
			}
			keep(t, "kernel-"+tt.name+".png", buf.Bytes())
			img, err := png.Decode(bytes.NewReader(buf.Bytes()))
			if err != nil {
				t.Fatalf("the plot is not a PNG: %v", err)
			}
			wantW, wantH := int(plotWidth/vg.Inch*plotDPI), int(plotHeight/vg.Inch*plotDPI)
			if b := img.Bounds(); b.Dx() != wantW || b.Dy() != wantH {
				t.Errorf("plot is %v, want %d×%d", b.Size(), wantW, wantH)
			}
			for axis, c := range axisColours {
				if !hasColour(img, c) {
					t.Errorf("no trace of the %c axis colour in the plot", "xyz"[axis])
				}
			}
			if buf.Len() > 200<<10 {
				t.Errorf("plot PNG is %d bytes, want under 200 KB", buf.Len())
			}
		})
	}
}

func TestKernelPlotFile(t *testing.T) {
	a, err := tensor.Analyze(tensor.Laplace7(), tensor.AnalyzeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "lap.png")
	if err := KernelPlot(a, "laplace7", path, false); err != nil {
		t.Fatal(err)
	}
	if err := KernelPlot(a, "laplace7", path, false); err == nil {
		t.Error("an existing plot was replaced without overwrite")
	}
	if err := KernelPlot(a, "laplace7", path, true); err != nil {
		t.Errorf("overwrite: %v", err)
	}
	entries, _ := os.ReadDir(filepath.Dir(path))
	if len(entries) != 1 {
		t.Errorf("folder holds %d entries after writing one plot, want 1 (no temporaries left)", len(entries))
	}
}

func TestKernelPlotRejectsEmptyFigures(t *testing.T) {
	if err := WriteKernelPlot(&bytes.Buffer{}, &KernelFigure{}); err == nil {
		t.Error("an empty figure was drawn")
	}
	f := &KernelFigure{ModeValues: [3][]float64{{0, 0}, {1}, {1}}, Candidates: []Candidate{{Form: "direct", Macs: 1}}}
	if err := WriteKernelPlot(&bytes.Buffer{}, f); err == nil {
		t.Error("a zero kernel's spectrum was drawn on a log scale")
	}
}
