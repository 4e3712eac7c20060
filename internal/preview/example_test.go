package preview_test

import (
	"bytes"
	"fmt"
	"image/png"

	"github.com/tripass/tripass/internal/phantom"
	"github.com/tripass/tripass/internal/preview"
	"github.com/tripass/tripass/tensor"
)

// A preview of the synthetic rock core: 6 × 6 × 10 µm voxels, so the xz and yz sections
// come out 10/6 times taller per slice than the xy section is per row.
func ExampleReadSections() {
	core := phantom.RockCore(96, 96, 48, [3]float64{6, 6, 10}, 1)
	s, err := preview.ReadSections(core, preview.Centre(core.Header()), nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, p := range s.Planes {
		fmt.Printf("%v: %d×%d voxels\n", p.Section, p.W, p.H)
	}
	_, lay, err := preview.Render([]*preview.Sections{s}, preview.Options{Width: 288})
	if err != nil {
		fmt.Println(err)
		return
	}
	for k, r := range lay.Panels[0] {
		fmt.Printf("%v panel: %d×%d pixels\n", s.Planes[k].Section, r.Dx(), r.Dy())
	}
	fmt.Printf("%g µm per pixel; scale bar %g µm\n", lay.Scale, lay.ScaleLength)
	// Output:
	// xy: 96×96 voxels
	// xz: 96×48 voxels
	// yz: 96×48 voxels
	// xy panel: 288×288 pixels
	// xz panel: 288×240 pixels
	// yz panel: 288×240 pixels
	// 2 µm per pixel; scale bar 100 µm
}

// The grey levels of a preview come from percentiles of the sections' values.
func ExampleContrastWindow() {
	core := phantom.RockCore(64, 64, 8, [3]float64{6, 6, 10}, 1)
	s, err := preview.ReadSections(core, [3]int{32, 32, 4}, []preview.Section{preview.XY})
	if err != nil {
		fmt.Println(err)
		return
	}
	w, err := preview.ContrastWindow(s, 0, 100) // the full range: min to max
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(w.Lo < 5000, w.Hi > 18000) // air is dark, the matrix and grains bright
	// Output: true true
}

// A kernel figure of the 7-point Laplacian: multilinear rank (2,2,2), so two n-mode
// singular values per axis, and direct application (7 taps) is the cheapest exact plan.
func ExampleWriteKernelPlot() {
	a, err := tensor.Analyze(tensor.Laplace7(), tensor.AnalyzeOptions{})
	if err != nil {
		fmt.Println(err)
		return
	}
	f := preview.FigureFromAnalysis(a, "laplace7")
	for _, c := range f.Candidates {
		if c.Chosen {
			fmt.Printf("chosen: %s, %d multiply-adds\n", c.Label, c.Macs)
		}
	}
	var buf bytes.Buffer
	if err := preview.WriteKernelPlot(&buf, f); err != nil {
		fmt.Println(err)
		return
	}
	img, err := png.Decode(&buf)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(img.Bounds().Size())
	// Output:
	// chosen: direct, 7 multiply-adds
	// (864,336)
}
