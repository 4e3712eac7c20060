package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/kerneltext"
	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

// --- tripass kernel make -----------------------------------------------------------------

// Flags of 'kernel make'. Widths are in voxels unless they carry a unit and --spacing
// gives the voxel size.
var (
	kmSigma = &cli.StringFlag{
		Name: "sigma", Category: "Kernel",
		Usage: "standard deviation `X,Y,Z` of the Gaussian (one value for all axes), in voxels, or with a unit " +
			"(nm, um, mm) and --spacing; 0 on an axis means no smoothing along it",
	}
	kmSigma2 = &cli.StringFlag{
		Name: "sigma2", Category: "Kernel",
		Usage: "dog: standard deviation `X,Y,Z` of the subtracted (usually wider) Gaussian, same units as --sigma",
	}
	kmOrder = &cli.StringFlag{
		Name: "order", Category: "Kernel", Value: "0,0,0",
		Usage: "gaussian: derivative order `NX,NY,NZ` along x, y, z (0 to 3 each)",
	}
	kmTruncate = &cli.Float64Flag{
		Name: "truncate", Category: "Kernel", Value: tensor.DefaultTruncate,
		Usage: "half-width `T` of Gaussians in standard deviations: radius = int(T·sigma + 0.5) voxels",
	}
	kmAxis = &cli.StringFlag{
		Name: "axis", Category: "Kernel",
		Usage: "gaussian-d1, gaussian-d2, sobel: the `AXIS` of the derivative, x, y or z",
	}
	kmSize = &cli.StringFlag{
		Name: "size", Category: "Kernel",
		Usage: "box: size `X,Y,Z` in voxels, odd numbers (one value for all axes)",
	}
	kmRadius = &cli.Float64Flag{
		Name: "radius", Category: "Kernel",
		Usage: "ball: radius `R` in voxels; taps within R of the centre are kept",
	}
	kmAngles = &cli.StringFlag{
		Name: "angles", Category: "Kernel", Value: "0,0,0",
		Usage: "oriented-gaussian: rotation `A,B,C` in degrees about the x, y and z axes, applied in that order " +
			"(right-handed: counter-clockwise seen from the positive end of the axis)",
	}
	kmSpacing = &cli.StringFlag{
		Name: "spacing", Category: "Kernel",
		Usage: "voxel size `X,Y,Z` with a unit (e.g. 0.65,0.65,2um), to give --sigma and --sigma2 in that unit",
	}
	kmOutput = &cli.StringFlag{
		Name: "output", Aliases: []string{"o"}, Category: "Output",
		Usage: "kernel `FILE` to write: .npy (NumPy, float64) or .txt (tripass's text format)",
	}
	kmFloat32 = &cli.BoolFlag{
		Name: "float32", Category: "Output",
		Usage: "write .npy as float32 instead of float64",
	}
	kmOverwrite = &cli.BoolFlag{
		Name: "overwrite", Category: "Output",
		Usage: "replace an existing output file (only once the new one is complete)",
	}
)

// kernelKind is one built-in kernel: what it is, which flags it takes, how it is made.
type kernelKind struct {
	name, about string
	flags       []string
	make        func(c *cli.Context) (*tensor.Dense, string, error)
}

var kernelKinds = []kernelKind{
	{"gaussian", "sampled Gaussian, normalised to sum 1, or its derivative with --order", []string{"sigma", "order", "truncate", "spacing"}, makeGaussian},
	{"gaussian-d1", "first derivative of a Gaussian along --axis", []string{"sigma", "axis", "truncate", "spacing"}, makeGaussianDerivative(1)},
	{"gaussian-d2", "second derivative of a Gaussian along --axis", []string{"sigma", "axis", "truncate", "spacing"}, makeGaussianDerivative(2)},
	{"box", "mean over a box of --size voxels", []string{"size"}, makeBox},
	{"sobel", "3D Sobel derivative along --axis: central difference along it, [1,2,1] across; unnormalised (a unit ramp gives 32)", []string{"axis"}, makeSobel},
	{"laplace7", "7-point Laplacian stencil (3×3×3)", nil, makeLaplace7},
	{"log", "Laplacian of Gaussian; an axis with sigma 0 is neither smoothed nor differentiated", []string{"sigma", "truncate", "spacing"}, makeLoG},
	{"dog", "difference of Gaussians, G(--sigma) − G(--sigma2)", []string{"sigma", "sigma2", "truncate", "spacing"}, makeDoG},
	{"ball", "mean over a digital ball of --radius voxels", []string{"radius"}, makeBall},
	{"oriented-gaussian", "anisotropic Gaussian with --sigma along its own axes, turned by --angles: a model of a tilted point-spread function", []string{"sigma", "angles", "truncate", "spacing"}, makeOriented},
}

func kernelNames() string {
	var names []string
	for _, k := range kernelKinds {
		names = append(names, k.name)
	}
	return strings.Join(names, ", ")
}

func kernelMakeDescription() string {
	var b strings.Builder
	b.WriteString("Writes a built-in 3D kernel to FILE (.npy or .txt), for use with 'tripass convolve'\n")
	b.WriteString("or other tools. Widths are in voxels; give --spacing to state them in nm, um or mm.\n")
	b.WriteString("Kernels are in convolution order (the engine mirrors them): a derivative kernel\n")
	b.WriteString("gives a positive value on a ramp rising along its axis.\n\nNAME is one of:\n")
	for _, k := range kernelKinds {
		fl := "no flags"
		if len(k.flags) > 0 {
			fl = "--" + strings.Join(k.flags, ", --")
		}
		fmt.Fprintf(&b, "   %-18s %s (%s)\n", k.name, k.about, fl)
	}
	b.WriteString(`
Examples:
   tripass kernel make gaussian --sigma 1.5,1.5,0.75 -o g.npy
   tripass kernel make gaussian --sigma 0.4,0.4,1.2um --spacing 0.2,0.2,0.6um -o g.npy
   tripass kernel make oriented-gaussian --sigma 1,1,3 --angles 0,30,0 -o psf.npy
   tripass kernel make box --size 5 -o box5.txt

`)
	b.WriteString(kernelFileHelp)
	return b.String()
}

var kernelMakeCommand = &cli.Command{
	Name:      "make",
	Usage:     "write a built-in kernel (Gaussian, derivatives, box, Sobel, Laplacian, LoG, DoG, ball, oriented Gaussian) to a file",
	ArgsUsage: "NAME -o FILE",
	// A leaf command: no "help" subcommand (urfave/cli would add one on the first run,
	// which would also make the command look like a parent to permuteArgs).
	HideHelpCommand: true,
	Flags: []cli.Flag{kmSigma, kmSigma2, kmOrder, kmTruncate, kmAxis, kmSize, kmRadius, kmAngles, kmSpacing,
		kmOutput, kmFloat32, kmOverwrite, flagQuiet},
	Action: kernelMakeAction,
}

func kernelMakeAction(c *cli.Context) error {
	if c.NArg() != 1 {
		return usageErrorf("kernel make takes one NAME (%s), got %d arguments", kernelNames(), c.NArg())
	}
	name := c.Args().First()
	i := slices.IndexFunc(kernelKinds, func(k kernelKind) bool { return k.name == name })
	if i < 0 {
		return usageErrorf("unknown kernel %q; want one of %s", name, kernelNames())
	}
	kind := kernelKinds[i]
	for _, f := range []string{"sigma", "sigma2", "order", "truncate", "axis", "size", "radius", "angles", "spacing"} {
		if c.IsSet(f) && !slices.Contains(kind.flags, f) {
			return usageErrorf("--%s does not apply to the %s kernel", f, name)
		}
	}
	out := c.String(kmOutput.Name)
	if out == "" {
		return usageErrorf("kernel make needs an output file: -o FILE (.npy or .txt)")
	}
	if c.Bool(kmFloat32.Name) && !strings.EqualFold(filepath.Ext(out), ".npy") {
		return usageErrorf("--float32 applies to .npy output only; %s is text", out)
	}
	k, what, err := kind.make(c)
	if err != nil {
		return err
	}
	if err := writeKernel(out, k, c.Bool(kmFloat32.Name), c.Bool(kmOverwrite.Name)); err != nil {
		return err
	}
	note(c, "wrote %s: %s, %d×%d×%d taps (x×y×z), sum %.6g", out, what, k.I, k.J, k.K, sumTaps(k))
	return nil
}

func sumTaps(k *tensor.Dense) float64 {
	s := 0.0
	for _, v := range k.Data {
		s += v
	}
	return s
}

// widths reads a --sigma style flag into voxels along x, y, z, converting physical
// units with --spacing.
func widths(c *cli.Context, flag string) ([3]float64, error) {
	v, sp, err := lengths(c, flag)
	for i := range v {
		v[i] /= sp[i]
	}
	return v, err
}

// lengths reads a --sigma style flag into lengths along x, y, z and the voxel size to
// divide them by to get voxels: the --spacing values, in the flag's unit, when the
// flag has a unit, and (1, 1, 1) when it is in voxels.
func lengths(c *cli.Context, flag string) (v, spacing [3]float64, err error) {
	spacing = [3]float64{1, 1, 1}
	s := c.String(flag)
	if s == "" {
		return v, spacing, usageErrorf("the %s kernel needs --%s", c.Args().First(), flag)
	}
	v, unit, err := volume.ParseTriple(s)
	if err != nil {
		return v, spacing, usageErrorf("--%s: %v", flag, err)
	}
	for _, x := range v {
		if x < 0 {
			return v, spacing, usageErrorf("--%s %s: widths cannot be negative", flag, s)
		}
	}
	if unit == "" {
		if c.IsSet(kmSpacing.Name) {
			return v, spacing, usageErrorf("--%s %s has no unit, but --spacing is given; add the unit (e.g. %sum)", flag, s, s)
		}
		return v, spacing, nil
	}
	if !c.IsSet(kmSpacing.Name) {
		return v, spacing, usageErrorf("--%s %s is in %s; give the voxel size with --spacing X,Y,Z%s", flag, s, unit, unit)
	}
	sp, spUnit, err := volume.ParseTriple(c.String(kmSpacing.Name))
	if err != nil {
		return v, spacing, usageErrorf("--spacing: %v", err)
	}
	if spUnit == "" {
		return v, spacing, usageErrorf("--spacing %s needs a unit (nm, um or mm)", c.String(kmSpacing.Name))
	}
	for i := range v {
		if !(sp[i] > 0) {
			return v, spacing, usageErrorf("--spacing %s: voxel sizes must be positive", c.String(kmSpacing.Name))
		}
		// Express the spacing in the flag's unit.
		spacing[i], err = volume.ConvertLength(sp[i], spUnit, unit)
		if err != nil {
			return v, spacing, usageErrorf("--spacing: %v", err)
		}
	}
	return v, spacing, nil
}

func truncate(c *cli.Context) (float64, error) {
	t := c.Float64(kmTruncate.Name)
	if !(t > 0) || math.IsInf(t, 0) {
		return 0, usageErrorf("--truncate %g: want a positive number of standard deviations", t)
	}
	return t, nil
}

// checkGaussianSize refuses Gaussians wider than a kernel file may hold.
func checkGaussianSize(sigma [3]float64, t float64) error {
	n := 1
	for a, s := range sigma {
		taps := 2*tensor.GaussianRadius(s, t) + 1
		if s*t > kerneltext.MaxAxis || taps > kerneltext.MaxAxis {
			return usageErrorf("sigma %g voxels along %s gives more than %d taps, the kernel limit", s, "xyz"[a:a+1], kerneltext.MaxAxis)
		}
		n *= taps
	}
	if n > kerneltext.MaxTaps {
		return usageErrorf("the kernel would have %d taps, more than the limit of %d", n, kerneltext.MaxTaps)
	}
	return nil
}

func parseAxis(c *cli.Context) (int, error) {
	switch strings.ToLower(c.String(kmAxis.Name)) {
	case "x", "0":
		return 0, nil
	case "y", "1":
		return 1, nil
	case "z", "2":
		return 2, nil
	case "":
		return 0, usageErrorf("the %s kernel needs --axis x, y or z", c.Args().First())
	}
	return 0, usageErrorf("--axis %q: want x, y or z", c.String(kmAxis.Name))
}

func parseInts(flag, s string) ([3]int, error) {
	var v [3]int
	parts := strings.Split(s, ",")
	if len(parts) != 1 && len(parts) != 3 {
		return v, usageErrorf("--%s %q: want one integer or three separated by commas", flag, s)
	}
	for i, p := range parts {
		n, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil {
			return v, usageErrorf("--%s %q: %q is not an integer", flag, s, p)
		}
		v[i] = n
	}
	if len(parts) == 1 {
		v[1], v[2] = v[0], v[0]
	}
	return v, nil
}

func makeGaussian(c *cli.Context) (*tensor.Dense, string, error) {
	order, err := parseInts("order", c.String(kmOrder.Name))
	if err != nil {
		return nil, "", err
	}
	for _, o := range order {
		if o < 0 || o > 3 {
			return nil, "", usageErrorf("--order %s: orders run from 0 to 3", c.String(kmOrder.Name))
		}
	}
	return gaussianKernel(c, order)
}

func makeGaussianDerivative(n int) func(c *cli.Context) (*tensor.Dense, string, error) {
	return func(c *cli.Context) (*tensor.Dense, string, error) {
		a, err := parseAxis(c)
		if err != nil {
			return nil, "", err
		}
		var order [3]int
		order[a] = n
		return gaussianKernel(c, order)
	}
}

func gaussianKernel(c *cli.Context, order [3]int) (*tensor.Dense, string, error) {
	sigma, err := widths(c, kmSigma.Name)
	if err != nil {
		return nil, "", err
	}
	t, err := truncate(c)
	if err != nil {
		return nil, "", err
	}
	for a := range 3 {
		if order[a] > 0 && sigma[a] == 0 {
			return nil, "", usageErrorf("a derivative along %s needs a sigma above 0 along %s", "xyz"[a:a+1], "xyz"[a:a+1])
		}
	}
	if err := checkGaussianSize(sigma, t); err != nil {
		return nil, "", err
	}
	what := "Gaussian, sigma " + fmtTriple(sigma) + " voxels"
	if order != [3]int{} {
		what += fmt.Sprintf(", derivative orders %d,%d,%d", order[0], order[1], order[2])
	}
	return tensor.GaussianPlanTruncated(sigma, order, t).Kernel, what, nil
}

func makeBox(c *cli.Context) (*tensor.Dense, string, error) {
	if !c.IsSet(kmSize.Name) {
		return nil, "", usageErrorf("the box kernel needs --size X,Y,Z (odd voxels)")
	}
	size, err := parseInts("size", c.String(kmSize.Name))
	if err != nil {
		return nil, "", err
	}
	for _, n := range size {
		if n < 1 || n%2 == 0 || n > kerneltext.MaxAxis {
			return nil, "", usageErrorf("--size %s: sizes must be odd, from 1 to %d, so that the box has a centre", c.String(kmSize.Name), kerneltext.MaxAxis)
		}
	}
	if size[0]*size[1]*size[2] > kerneltext.MaxTaps {
		return nil, "", usageErrorf("--size %s: more than %d taps", c.String(kmSize.Name), kerneltext.MaxTaps)
	}
	return tensor.BoxPlan(size).Kernel, fmt.Sprintf("box mean over %d×%d×%d voxels", size[0], size[1], size[2]), nil
}

func makeSobel(c *cli.Context) (*tensor.Dense, string, error) {
	a, err := parseAxis(c)
	if err != nil {
		return nil, "", err
	}
	return tensor.SobelPlan(a).Kernel, "Sobel derivative along " + "xyz"[a:a+1] + " (unnormalised: divide by 32)", nil
}

func makeLaplace7(c *cli.Context) (*tensor.Dense, string, error) {
	return tensor.Laplace7(), "7-point Laplacian stencil", nil
}

func makeLoG(c *cli.Context) (*tensor.Dense, string, error) {
	sigma, err := widths(c, kmSigma.Name)
	if err != nil {
		return nil, "", err
	}
	t, err := truncate(c)
	if err != nil {
		return nil, "", err
	}
	if sigma == [3]float64{} {
		return nil, "", usageErrorf("--sigma: the Laplacian of Gaussian needs a sigma above 0 on some axis")
	}
	if err := checkGaussianSize(sigma, t); err != nil {
		return nil, "", err
	}
	return tensor.LoGPlanTruncated(sigma, t).Kernel, "Laplacian of Gaussian, sigma " + fmtTriple(sigma) + " voxels", nil
}

func makeDoG(c *cli.Context) (*tensor.Dense, string, error) {
	s1, err := widths(c, kmSigma.Name)
	if err != nil {
		return nil, "", err
	}
	s2, err := widths(c, kmSigma2.Name)
	if err != nil {
		return nil, "", err
	}
	t, err := truncate(c)
	if err != nil {
		return nil, "", err
	}
	wide := [3]float64{max(s1[0], s2[0]), max(s1[1], s2[1]), max(s1[2], s2[2])}
	if err := checkGaussianSize(wide, t); err != nil {
		return nil, "", err
	}
	return tensor.DoGPlanTruncated(s1, s2, t).Kernel,
		"difference of Gaussians, sigma " + fmtTriple(s1) + " minus " + fmtTriple(s2) + " voxels", nil
}

func makeBall(c *cli.Context) (*tensor.Dense, string, error) {
	if !c.IsSet(kmRadius.Name) {
		return nil, "", usageErrorf("the ball kernel needs --radius (voxels)")
	}
	r := c.Float64(kmRadius.Name)
	if !(r >= 0) || 2*math.Floor(r)+1 > kerneltext.MaxAxis || math.Pow(2*math.Floor(r)+1, 3) > kerneltext.MaxTaps {
		return nil, "", usageErrorf("--radius %g: want a radius from 0 to below 128 voxels (at most 255³ taps)", r)
	}
	b := tensor.Ball(r)
	return b, fmt.Sprintf("ball of radius %g voxels (%d taps)", r, b.NonZero()), nil
}

func makeOriented(c *cli.Context) (*tensor.Dense, string, error) {
	sigma, sp, err := lengths(c, kmSigma.Name)
	if err != nil {
		return nil, "", err
	}
	for _, s := range sigma {
		if s == 0 {
			return nil, "", usageErrorf("--sigma: an oriented Gaussian needs a sigma above 0 on every axis")
		}
	}
	t, err := truncate(c)
	if err != nil {
		return nil, "", err
	}
	deg, unit, err := volume.ParseTriple(c.String(kmAngles.Name))
	if err != nil || unit != "" {
		return nil, "", usageErrorf("--angles %q: want A,B,C in degrees", c.String(kmAngles.Name))
	}
	var rad [3]float64
	for i, d := range deg {
		rad[i] = d * math.Pi / 180
	}
	// The Gaussian is turned in physical space, then expressed in voxels: on
	// anisotropic voxels a turned Gaussian is not a turned Gaussian of scaled sigmas.
	cov := tensor.OrientedCovariance(sigma, rad)
	for i := range 3 {
		for j := range 3 {
			cov[i][j] /= sp[i] * sp[j]
		}
	}
	for i := range 3 {
		if t*math.Sqrt(cov[i][i]) > kerneltext.MaxAxis {
			return nil, "", usageErrorf("the oriented Gaussian would have more than %d taps along %s, the kernel limit", kerneltext.MaxAxis, "xyz"[i:i+1])
		}
	}
	size := tensor.CovarianceSize(cov, t)
	if size[0] > kerneltext.MaxAxis || size[1] > kerneltext.MaxAxis || size[2] > kerneltext.MaxAxis ||
		size[0]*size[1]*size[2] > kerneltext.MaxTaps {
		return nil, "", usageErrorf("the oriented Gaussian would be %d×%d×%d taps, beyond the kernel limits", size[0], size[1], size[2])
	}
	units := "voxels"
	if c.IsSet(kmSpacing.Name) {
		_, units, _ = volume.ParseTriple(c.String(kmSigma.Name))
	}
	return tensor.CovarianceGaussian(cov, t),
		fmt.Sprintf("oriented Gaussian, sigma %s %s turned %s degrees about x, y, z", fmtTriple(sigma), units, fmtTriple(deg)), nil
}

func fmtTriple(v [3]float64) string {
	f := func(x float64) string { return strconv.FormatFloat(x, 'g', 6, 64) }
	return f(v[0]) + "," + f(v[1]) + "," + f(v[2])
}

// --- tripass kernel inspect --------------------------------------------------------------

var (
	kiTolerance = &cli.Float64Flag{
		Name: "tolerance", Category: "Analysis", Value: tensor.DefaultTolerance,
		Usage: "largest relative Frobenius error `E` = ‖K − plan‖/‖K‖ a separable form may have",
	}
	kiMaxTerms = &cli.IntFlag{
		Name: "max-terms", Category: "Analysis", Value: tensor.DefaultMaxCPTerms,
		Usage: "largest number `N` of separable (CP) terms to try (0: none)",
	}
	kiJSON = &cli.BoolFlag{
		Name: "json", Category: "Output",
		Usage: "print the analysis as one JSON object instead of text",
	}
	kiFactors = &cli.StringFlag{
		Name: "factors", Category: "Output",
		Usage: "write the chosen plan's 1D taps to `FILE` as JSON (see the description for the layout)",
	}
)

var kernelInspectCommand = &cli.Command{
	Name:            "inspect",
	Usage:           "tell whether a kernel splits into 1D passes, at what error and cost",
	ArgsUsage:       "FILE",
	HideHelpCommand: true,
	Description: `Analyses the 3D kernel in FILE with the higher-order SVD and prints its shape, norm,
the n-mode singular values along x, y and z (the spectrum of each unfolding: how many
independent 1D profiles the kernel has along that axis), its multilinear rank at the
tolerance, whether it is exactly separable (one outer product of three 1D kernels),
and the candidate ways to apply it: direct (one multiply-add per non-zero tap), a sum
of R separable terms (CP, R·(kx+ky+kz) multiply-adds per voxel), or a Tucker form
(r1·kx + r1·r2·ky + r1·r2·kz with x passed first; "yxz" passes y first). Each comes
with its relative error and cost; the chosen plan is the cheapest within --tolerance,
with its predicted speed-up over direct convolution. CP fits whose terms diverge and
cancel (degenerate) are shown but never chosen.

--json prints one object: shape [kx,ky,kz], norm, nonzero, tolerance,
mode_singular_values {"x":[…],"y":[…],"z":[…]} (descending), multilinear_rank
[rx,ry,rz] (at the tolerance), exact_multilinear_rank, separable, direct_macs,
options [{form, terms, ranks (tucker), order ("xyz" or "yxz"; "xyz" for direct),
relative_error, macs_per_voxel, degenerate}], plan (the chosen option, with speedup).

--factors FILE writes the chosen plan as JSON: shape [kx,ky,kz], center [cx,cy,cz]
(the origin tap, counted from 0), form, order, ranks, relative_error, macs_per_voxel,
and terms, a list of {"x":[…],"y":[…],"z":[…]} whose outer products x∘y∘z sum to the
planned kernel (tap i of x lies at offset i − cx); for a Tucker plan also branches
[{"first":[…],"leaves":[{"second":[…],"z":[…]}]}], the pass tree the filter runs
("first" along x for order xyz, along y for yxz), which shares each first pass among
its leaves. A direct plan has no terms; its kernel is given as "kernel", x fastest.
Taps are in convolution order (as in the kernel file).

Examples:
   tripass kernel inspect psf.npy
   tripass kernel inspect psf.npy --tolerance 1e-3 --json
   tripass kernel inspect g.txt --factors g-taps.json
   tripass kernel inspect psf.npy --tolerance 1e-3 --plot psf-plans.png

` + kernelFileHelp,
	Flags:  []cli.Flag{kiTolerance, kiMaxTerms, kiJSON, kiFactors, kmOverwrite, kiPlot},
	Action: kernelInspectAction,
}

var kernelCommand = &cli.Command{
	Name:  "kernel",
	Usage: "make built-in 3D kernels and find the cheapest separable form of any kernel",
	Description: "'tripass kernel make' writes a built-in kernel to a .npy or text file; 'tripass kernel\n" +
		"inspect' analyses a kernel file and says how cheaply it can be applied.\n\n" + kernelFileHelp,
	Subcommands: []*cli.Command{kernelMakeCommand, kernelInspectCommand},
}

func init() {
	kernelMakeCommand.Description = kernelMakeDescription()
	register(kernelCommand)
}

// Wire forms of the analysis (the --json output).
type optionJSON struct {
	Form       string  `json:"form"`
	Terms      int     `json:"terms"`
	Ranks      *[3]int `json:"ranks,omitempty"`
	Order      string  `json:"order"`
	RelError   float64 `json:"relative_error"`
	ErrorBound float64 `json:"error_bound,omitempty"`
	Macs       int     `json:"macs_per_voxel"`
	Degenerate bool    `json:"degenerate"`
	Speedup    float64 `json:"speedup,omitempty"`
}

type inspectJSON struct {
	File                 string               `json:"file"`
	Shape                [3]int               `json:"shape"`
	Norm                 float64              `json:"norm"`
	NonZero              int                  `json:"nonzero"`
	Tolerance            float64              `json:"tolerance"`
	ModeSingularValues   map[string][]float64 `json:"mode_singular_values"`
	MultilinearRank      [3]int               `json:"multilinear_rank"`
	ExactMultilinearRank [3]int               `json:"exact_multilinear_rank"`
	Separable            bool                 `json:"separable"`
	DirectMacs           int                  `json:"direct_macs"`
	Options              []optionJSON         `json:"options"`
	Plan                 optionJSON           `json:"plan"`
}

func toOptionJSON(o *tensor.Option) optionJSON {
	j := optionJSON{Form: o.Form.String(), Terms: o.Terms, RelError: o.RelError, ErrorBound: o.Bound,
		Macs: o.Macs, Degenerate: o.Degenerate}
	// Every option has an order, so that readers need no special case; direct, which
	// has no 1D passes, reports the default "xyz".
	j.Order = o.Order.String()
	if o.Form == tensor.Tucker {
		r := o.Ranks
		j.Ranks = &r
	}
	return j
}

// speedup is the predicted speed-up of m multiply-adds per voxel over direct; a plan
// that costs nothing (the identity) counts as one.
func speedup(direct, m int) float64 { return float64(max(direct, 1)) / float64(max(m, 1)) }

func kernelInspectAction(c *cli.Context) error {
	if c.NArg() != 1 {
		return usageErrorf("kernel inspect takes one kernel FILE, got %d arguments", c.NArg())
	}
	path := c.Args().First()
	tol := c.Float64(kiTolerance.Name)
	if !(tol > 0 && tol < 1) {
		return usageErrorf("--tolerance %g: want a relative error above 0 and below 1", tol)
	}
	maxTerms := c.Int(kiMaxTerms.Name)
	// Each extra CP term costs another ALS fit with restarts; a kernel that needs more
	// than 64 terms is served better by its Tucker form, which is always tried.
	if maxTerms < 0 || maxTerms > 64 {
		return usageErrorf("--max-terms %d: want 0 to 64 (0: no CP candidates)", maxTerms)
	}
	if maxTerms == 0 {
		maxTerms = -1 // AnalyzeOptions: negative means none
	}
	k, err := loadKernel(path)
	if err != nil {
		return err
	}
	opt := analyzeOptions(k, tol)
	opt.MaxCPTerms = maxTerms
	an, err := tensor.Analyze(k, opt)
	if err != nil {
		return inputError(fmt.Errorf("kernel %s: %w", path, err))
	}
	if f := c.String(kiFactors.Name); f != "" {
		if err := writeFactors(f, an, c.Bool(kmOverwrite.Name)); err != nil {
			return err
		}
	}
	if err := plotKernel(c, path, an); err != nil { // --plot, in previewcmd.go
		return err
	}
	if c.Bool(kiJSON.Name) {
		return printInspectJSON(c.App.Writer, path, k, an)
	}
	printInspect(c.App.Writer, path, k, an)
	return nil
}

func printInspectJSON(w io.Writer, path string, k *tensor.Dense, an *tensor.Analysis) error {
	j := inspectJSON{
		File: path, Shape: an.Shape, Norm: an.Norm, NonZero: k.NonZero(), Tolerance: an.Tolerance,
		ModeSingularValues:   map[string][]float64{},
		MultilinearRank:      an.MultilinearRank,
		ExactMultilinearRank: an.ExactRank,
		Separable:            an.Separable,
		DirectMacs:           an.DirectMacs,
	}
	for n, axis := range []string{"x", "y", "z"} {
		v := an.ModeSingularValues[n]
		if v == nil {
			v = []float64{}
		}
		j.ModeSingularValues[axis] = v
	}
	for i := range an.Options {
		j.Options = append(j.Options, toOptionJSON(&an.Options[i]))
	}
	j.Plan = toOptionJSON(an.Chosen)
	j.Plan.Speedup = speedup(an.DirectMacs, an.Chosen.Macs)
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(j)
}

// spectrumShown is how many n-mode singular values the text report lists per axis.
const spectrumShown = 6

func printInspect(w io.Writer, path string, k *tensor.Dense, an *tensor.Analysis) {
	d := an.Shape
	fmt.Fprintf(w, "kernel     %s\n", path)
	fmt.Fprintf(w, "shape      %d×%d×%d taps (x×y×z), %d non-zero\n", d[0], d[1], d[2], k.NonZero())
	fmt.Fprintf(w, "norm       %.6g (Frobenius), sum %.6g\n", an.Norm, sumTaps(k))
	fmt.Fprintf(w, "n-mode singular values (largest first):\n")
	for n, axis := range []string{"x", "y", "z"} {
		v := an.ModeSingularValues[n]
		var parts []string
		for i, s := range v {
			if i == spectrumShown {
				parts = append(parts, fmt.Sprintf("… (%d more)", len(v)-spectrumShown))
				break
			}
			parts = append(parts, fmt.Sprintf("%.4g", s))
		}
		if len(v) == 0 {
			parts = []string{"(all zero)"}
		}
		fmt.Fprintf(w, "  %s  %s\n", axis, strings.Join(parts, "  "))
	}
	r, e := an.MultilinearRank, an.ExactRank
	fmt.Fprintf(w, "multilinear rank  (%d,%d,%d) at tolerance %.3g; exact (%d,%d,%d)\n",
		r[0], r[1], r[2], an.Tolerance, e[0], e[1], e[2])
	if an.Norm == 0 {
		fmt.Fprintf(w, "all taps are zero: this kernel filters any volume to 0\n")
	}
	if an.Separable {
		fmt.Fprintf(w, "separable  yes: one outer product of three 1D kernels\n")
	} else {
		fmt.Fprintf(w, "separable  no\n")
	}
	fmt.Fprintf(w, "\ncandidates (direct: %d multiply-adds per voxel)\n", an.DirectMacs)
	row := func(format string, a ...any) {
		fmt.Fprintln(w, strings.TrimRight(fmt.Sprintf(format, a...), " "))
	}
	row("  %-7s %5s  %-9s %-5s %13s %12s", "form", "terms", "ranks", "order", "rel. error", "macs/voxel")
	for i := range an.Options {
		o := &an.Options[i]
		ranks, order, terms := "-", "-", "-"
		if o.Form == tensor.Tucker {
			ranks = fmt.Sprintf("(%d,%d,%d)", o.Ranks[0], o.Ranks[1], o.Ranks[2])
		}
		if o.Form != tensor.Direct {
			order = o.Order.String()
			terms = strconv.Itoa(o.Terms)
		}
		note := ""
		switch {
		case o == an.Chosen:
			note = "← chosen"
		case o.Degenerate:
			note = "degenerate (terms cancel; never chosen)"
		case o.RelError > an.Tolerance:
			note = "above tolerance"
		}
		row("  %-7s %5s  %-9s %-5s %13.3e %12d  %s", o.Form, terms, ranks, order, o.RelError, o.Macs, note)
	}
	ch := an.Chosen
	fmt.Fprintf(w, "\nplan       %s: %d multiply-adds per voxel against %d direct, predicted speed-up %.1f×, relative error %.2e\n",
		describeOption(ch), ch.Macs, an.DirectMacs, speedup(an.DirectMacs, ch.Macs), ch.RelError)
}

// Wire form of --factors.
type factorsJSON struct {
	Shape    [3]int       `json:"shape"`
	Center   [3]int       `json:"center"`
	Form     string       `json:"form"`
	Order    string       `json:"order,omitempty"`
	Ranks    *[3]int      `json:"ranks,omitempty"`
	RelError float64      `json:"relative_error"`
	Macs     int          `json:"macs_per_voxel"`
	Terms    []termJSON   `json:"terms"`
	Branches []branchJSON `json:"branches,omitempty"`
	Kernel   []float64    `json:"kernel,omitempty"`
}

type termJSON struct {
	X []float64 `json:"x"`
	Y []float64 `json:"y"`
	Z []float64 `json:"z"`
}

type branchJSON struct {
	First  []float64  `json:"first"`
	Leaves []leafJSON `json:"leaves"`
}

type leafJSON struct {
	Second []float64 `json:"second"`
	Z      []float64 `json:"z"`
}

func writeFactors(path string, an *tensor.Analysis, overwrite bool) error {
	o := an.Chosen
	p := o.Plan
	d := p.Kernel.Dims()
	j := factorsJSON{
		Shape:    d,
		Center:   [3]int{tensor.Center(d[0]), tensor.Center(d[1]), tensor.Center(d[2])},
		Form:     o.Form.String(),
		RelError: o.RelError,
		Macs:     o.Macs,
		Terms:    []termJSON{},
	}
	if o.Form == tensor.Direct {
		j.Kernel = p.Kernel.Data
	} else {
		j.Order = p.Order.String()
		for _, b := range p.Branches {
			bj := branchJSON{First: b.First}
			for _, l := range b.Leaves {
				x, y := b.First, l.Second
				if p.Order == tensor.YXZ {
					x, y = y, x
				}
				j.Terms = append(j.Terms, termJSON{X: x, Y: y, Z: l.Z})
				bj.Leaves = append(bj.Leaves, leafJSON{Second: l.Second, Z: l.Z})
			}
			j.Branches = append(j.Branches, bj)
		}
		if o.Form == tensor.Tucker {
			r := o.Ranks
			j.Ranks = &r
		} else {
			j.Branches = nil // a CP plan's branches are its terms
		}
	}
	b, err := json.MarshalIndent(j, "", " ")
	if err != nil {
		return err
	}
	f, err := atomicfile.Create(path, overwrite)
	if err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return usageErrorf("--factors %s: %v", path, err)
		}
		return ioError(fmt.Errorf("--factors %s: %w", path, err))
	}
	if _, err := f.Write(append(b, '\n')); err != nil {
		f.Abort()
		return ioError(fmt.Errorf("--factors %s: %w", path, err))
	}
	if err := f.Commit(); err != nil {
		return ioError(fmt.Errorf("--factors %s: %w", path, err))
	}
	return nil
}
