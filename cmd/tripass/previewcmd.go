package main

import (
	"errors"
	"fmt"
	"image/png"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/internal/preview"
	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

var previewCommand = &cli.Command{
	Name:      "preview",
	Usage:     "draw three orthogonal sections of a stack (or two, before and after) into a PNG",
	ArgsUsage: "STACK OUT.png",
	Description: `Draws the xy, xz and yz sections through one voxel of STACK (the centre unless --at
says otherwise), one above the other, into OUT.png. Sections are resampled to square
physical pixels, so a stack of 0.65 × 0.65 × 2 µm voxels looks as tall along z as it
really is. Grey levels run from the 0.5th to the 99.5th percentile of the three sections'
values (--percentiles), and a scale bar of a round length (1, 2 or 5 × 10^k µm, mm, ...)
is drawn when the voxel spacing is known (from the file or --spacing).

--compare OTHER draws the same sections of OTHER to the right, with the same grey levels
(taken from STACK, unless --own-contrast), to see what a filter did. OTHER must have
STACK's size in voxels.

Only what the sections need is read: the xy section alone (--sections xy) reads one
slice, seeking to it when the format allows; xz and yz need one pass over the stack.

Examples:
   tripass preview core.tif core.png
   tripass preview core.tif core-vs-smooth.png --compare core-smooth.tif --at 96,96,64
   tripass preview tissue.tif nuclei.png --at 300,250,40 --percentiles 1,99.9 --width 600
   tripass preview stack.tif top.png --sections xy --at 0,0,0`,
	Flags: append([]cli.Flag{
		&cli.StringFlag{Name: "at", Category: "Preview", DefaultText: "the centre voxel",
			Usage: "the voxel `X,Y,Z` the sections pass through, counted from 0; " +
				"with a unit (e.g. 600,600,400um) a physical position from the first voxel's centre"},
		&cli.StringFlag{Name: "percentiles", Category: "Preview", Value: "0.5,99.5",
			Usage: "`LOW,HIGH` percentiles (0 to 100) of the sections' values drawn black and white"},
		&cli.StringFlag{Name: "compare", Category: "Preview", Usage: "draw the same sections of stack `OTHER` beside STACK's (before | after)"},
		&cli.BoolFlag{Name: "own-contrast", Category: "Preview", Usage: "with --compare, give OTHER grey levels from its own percentiles instead of STACK's"},
		&cli.IntFlag{Name: "width", Category: "Preview", DefaultText: "one pixel per finest voxel spacing, 256 to 768",
			Usage: "width in `PIXELS` of each stack's column of sections"},
		&cli.StringFlag{Name: "sections", Category: "Preview", Value: "xy,xz,yz", Usage: "which `SECTIONS` to draw, top to bottom: any of xy, xz, yz"},
		flagOverwrite,
		flagQuiet,
		flagLog,
	}, inputFlags()...),
	Action: previewAction,
}

func init() { register(previewCommand) }

// maxPreviewWidth bounds --width: wider than a screen helps nobody, and the image
// grows with its square.
const maxPreviewWidth = 8192

func previewAction(c *cli.Context) error {
	if c.NArg() != 2 {
		return usageErrorf("preview takes STACK and OUT.png, got %d arguments", c.NArg())
	}
	inPath, outPath := c.Args().Get(0), c.Args().Get(1)
	if !strings.EqualFold(filepath.Ext(outPath), ".png") {
		return usageErrorf("%s: the preview is a PNG image; give an output name ending in .png", outPath)
	}
	paths := []string{inPath}
	if o := c.String("compare"); o != "" {
		paths = append(paths, o)
	}
	for _, p := range paths {
		if samePath(p, outPath) {
			return usageErrorf("%s: the output is also an input; choose another output name (inputs are never modified)", outPath)
		}
	}
	lo, hi, err := parsePercentiles(c.String("percentiles"))
	if err != nil {
		return err
	}
	width := c.Int("width")
	if width < 0 || width > maxPreviewWidth {
		return usageErrorf("--width %d: want 1 to %d pixels (or leave it out)", width, maxPreviewWidth)
	}
	want, err := preview.ParseSections(c.String("sections"))
	if err != nil {
		return usageErrorf("--sections: %v", err)
	}
	if c.Bool("own-contrast") && len(paths) == 1 {
		return usageErrorf("--own-contrast applies to --compare only")
	}

	var stacks []*preview.Sections
	var at [3]int
	for i, path := range paths {
		s, err := readPreviewSections(c, path, want, &at, i == 0)
		if err != nil {
			return err
		}
		if i > 0 {
			h0, h := stacks[0].Header, s.Header
			if h.NX != h0.NX || h.NY != h0.NY || h.NZ != h0.NZ {
				return usageErrorf("--compare %s is %d×%d×%d voxels and %s %d×%d×%d: compared stacks must have the same size",
					path, h.NX, h.NY, h.NZ, inPath, h0.NX, h0.NY, h0.NZ)
			}
			if h.Spacing != h0.Spacing || h.Unit != h0.Unit {
				note(c, "note: %s has spacing %s and %s %s; both are drawn with %s's",
					path, spacingText(h), inPath, spacingText(h0), inPath)
			}
		}
		stacks = append(stacks, s)
	}

	opt := preview.Options{Width: width, Percentiles: [2]float64{lo, hi}}
	for _, p := range paths {
		opt.Titles = append(opt.Titles, filepath.Base(strings.TrimRight(p, "/")))
	}
	if len(stacks) > 1 && !c.Bool("own-contrast") {
		w, err := preview.ContrastWindow(stacks[0], lo, hi)
		if err != nil {
			return usageErrorf("--percentiles: %v", err)
		}
		opt.Windows = []preview.Window{w, w}
		opt.Notes = []string{fmt.Sprintf("(%s–%s percentile)", g(lo), g(hi)), "(as " + opt.Titles[0] + ")"}
	}
	img, lay, err := preview.Render(stacks, opt)
	if err != nil {
		return usageErrorf("%v", err)
	}

	f, err := atomicfile.Create(outPath, c.Bool(flagOverwrite.Name))
	if err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return usageErrorf("%s: %v", outPath, err)
		}
		return ioError(fmt.Errorf("%s: %w", outPath, unwrapPathError(err)))
	}
	enc := png.Encoder{CompressionLevel: png.BestCompression}
	if err := enc.Encode(f, img); err != nil {
		f.Abort()
		return ioError(fmt.Errorf("%s: %w", outPath, err))
	}
	if err := f.Commit(); err != nil {
		return ioError(fmt.Errorf("%s: %w", outPath, err))
	}
	b := img.Bounds()
	msg := fmt.Sprintf("wrote %s: %d×%d pixels, sections through voxel (%d, %d, %d)", outPath, b.Dx(), b.Dy(), at[0], at[1], at[2])
	if lay.Unit != "" {
		msg += fmt.Sprintf(", %s %s per pixel", g(lay.Scale), displayUnit(lay.Unit))
	} else {
		msg += " (voxel spacing unknown: drawn as cubes, no scale bar; give --spacing)"
	}
	note(c, "%s", msg)
	return nil
}

// readPreviewSections opens path and reads its sections. The first stack fixes the
// point, from --at or its centre, into *at; later stacks use the same voxel.
func readPreviewSections(c *cli.Context, path string, want []preview.Section, at *[3]int, first bool) (*preview.Sections, error) {
	in, err := openInput(c, path)
	if err != nil {
		return nil, err
	}
	defer in.Close()
	h := in.Header()
	if first {
		if *at, err = parseAt(c.String("at"), h); err != nil {
			return nil, err
		}
	}
	stream := false
	for _, s := range want {
		stream = stream || s != preview.XY
	}
	var src volume.Source = in
	var p *progress
	if stream {
		label := "preview"
		if !first {
			label += " " + filepath.Base(path)
		}
		p = newProgress(c, label, h)
		src = progressSource{in, p}
	} else if _, ok := in.Source.(volume.SliceSeeker); ok {
		src = in // input's SeekSlice names the file in its errors
	} else {
		src = readOnly{in}
	}
	s, err := preview.ReadSections(src, *at, want)
	if p != nil {
		p.done()
	}
	if errors.Is(err, preview.ErrOutside) {
		return nil, usageErrorf("--at: %s: %v", path, err)
	}
	if err != nil {
		var ee *exitError
		if errors.As(err, &ee) {
			return nil, err
		}
		return nil, inputError(fmt.Errorf("%s: %w", path, err))
	}
	return s, nil
}

// readOnly hides the SeekSlice of an input whose format cannot seek, so that the
// sections are read through instead.
type readOnly struct{ volume.Source }

// parseAt reads --at: voxel indices, or a physical position with a unit.
func parseAt(s string, h volume.Header) ([3]int, error) {
	if s == "" {
		return preview.Centre(h), nil
	}
	v, unit, err := volume.ParseTriple(s)
	if err != nil {
		return [3]int{}, usageErrorf("--at: %v", err)
	}
	if strings.Count(s, ",") != 2 {
		return [3]int{}, usageErrorf("--at %q: want X,Y,Z", s)
	}
	n := [3]int{h.NX, h.NY, h.NZ}
	var at [3]int
	for i := range v {
		x := v[i]
		if unit != "" {
			if h.Unit == "" {
				return at, usageErrorf("--at %q is in %s, but the stack's voxel spacing is unknown; give it with --spacing", s, unit)
			}
			phys, err := volume.ConvertLength(x, unit, h.Unit)
			if err != nil {
				return at, usageErrorf("--at: %v", err)
			}
			x = math.Round(phys / h.Normalize().Spacing[i])
		} else if x != math.Trunc(x) {
			return at, usageErrorf("--at %q: voxel positions are whole numbers (or give a unit, e.g. %sum)", s, strings.TrimRight(s, " "))
		}
		if x < 0 || x >= float64(n[i]) {
			return at, usageErrorf("--at %q: %c = %s is outside the stack (0 to %d)", s, "xyz"[i], g(x), n[i]-1)
		}
		at[i] = int(x)
	}
	return at, nil
}

// parsePercentiles reads --percentiles LOW,HIGH.
func parsePercentiles(s string) (lo, hi float64, err error) {
	parts := strings.Split(s, ",")
	if len(parts) != 2 {
		return 0, 0, usageErrorf("--percentiles %q: want LOW,HIGH, e.g. 0.5,99.5", s)
	}
	var v [2]float64
	for i, p := range parts {
		v[i], err = strconv.ParseFloat(strings.TrimSpace(strings.TrimSuffix(strings.TrimSpace(p), "%")), 64)
		if err != nil {
			return 0, 0, usageErrorf("--percentiles %q: %q is not a number", s, p)
		}
	}
	if !(v[0] >= 0 && v[0] < v[1] && v[1] <= 100) {
		return 0, 0, usageErrorf("--percentiles %q: want 0 ≤ LOW < HIGH ≤ 100", s)
	}
	return v[0], v[1], nil
}

// spacingText writes a header's spacing for people ("6 × 6 × 10 µm").
func spacingText(h volume.Header) string {
	u := displayUnit(h.Unit)
	if u == "" {
		u = "voxels (unknown)"
	}
	return fmt.Sprintf("%s × %s × %s %s", g(h.Spacing[0]), g(h.Spacing[1]), g(h.Spacing[2]), u)
}

// displayUnit spells a canonical unit for people ("um" → "µm").
func displayUnit(u string) string {
	if u == "um" {
		return "µm"
	}
	return u
}

// --- tripass kernel inspect --plot ------------------------------------------------------

var kiPlot = &cli.StringFlag{
	Name: "plot", Category: "Output",
	Usage: "draw the n-mode singular values per axis (log scale) and the relative error against " +
		"the cost of every candidate plan, chosen plan ringed, into `OUT.png`",
}

// plotKernel writes the --plot figure of 'kernel inspect', if asked for.
func plotKernel(c *cli.Context, kernelPath string, an *tensor.Analysis) error {
	out := c.String(kiPlot.Name)
	if out == "" {
		return nil
	}
	if !strings.EqualFold(filepath.Ext(out), ".png") {
		return usageErrorf("--plot %s: the plot is a PNG image; give a name ending in .png", out)
	}
	if samePath(out, kernelPath) {
		return usageErrorf("--plot %s: the output is also the input; choose another name", out)
	}
	title := fmt.Sprintf("%s (%d×%d×%d)", filepath.Base(kernelPath), an.Shape[0], an.Shape[1], an.Shape[2])
	if err := preview.KernelPlot(an, title, out, c.Bool(kmOverwrite.Name)); err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return usageErrorf("%s: %v", out, err)
		}
		return ioError(fmt.Errorf("%s: %w", out, unwrapPathError(err)))
	}
	note(c, "wrote %s", out)
	return nil
}
