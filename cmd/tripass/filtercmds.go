package main

import (
	"errors"
	"fmt"
	"math"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

// Flags shared by the filtering commands.
var (
	flagEdge = &cli.StringFlag{
		Name:     "edge",
		Category: "Filter",
		Value:    "symmetric",
		Usage: "`MODE` of extending the volume beyond its faces: symmetric (… c b a | a b c …), " +
			"reflect (… c b | a b c …), replicate (… a a | a b …), periodic, or constant (--fill)",
	}
	flagFill = &cli.Float64Flag{
		Name:     "fill",
		Category: "Filter",
		Usage:    "`VALUE` outside the volume with --edge constant, in the input's intensity units",
	}
	flagThreads = &cli.IntFlag{
		Name:     "threads",
		Category: "Filter",
		Usage:    "`N` worker threads (0: all cores)",
	}
	flagOutType = &cli.StringFlag{Name: "type"} // its usage differs per command: see outTypeFlag
)

// outTypeFlag is --type with the default of the command it belongs to.
func outTypeFlag(def string) cli.Flag {
	return &cli.StringFlag{
		Name:     flagOutType.Name,
		Category: "Output",
		Usage:    "sample `TYPE` of OUT: uint8, uint16, int16, uint32, int32, float32 or float64 (default: " + def + ")",
	}
}

// filterFlags lists a filtering command's flags: its own, then the shared ones. Commands
// that write float32 unless told otherwise pass "float32" as outDefault.
func filterFlags(outDefault string, own ...cli.Flag) []cli.Flag {
	fl := append(own, flagEdge, flagFill, flagThreads, flagMaxMemory, outTypeFlag(outDefault), flagQuiet, flagLog)
	fl = append(fl, inputFlags()...)
	fl = append(fl, outputFlags()...)
	return append(fl, shardFlags()...)
}

// filterJob is one filtering run: the plans whose outputs are combined voxel by voxel.
type filterJob struct {
	plans   []*tensor.Plan
	combine volume.Combine
	outType volume.SampleType // the default when --type is not given
	what    string            // one line for stderr: what is applied
}

// runFilter streams IN through the job's plans into OUT.
func runFilter(c *cli.Context, name string, build func(c *cli.Context, h volume.Header) (*filterJob, error)) error {
	if c.NArg() != 2 {
		return usageErrorf("%s takes IN and OUT, got %d arguments", name, c.NArg())
	}
	inPath, outPath := c.Args().Get(0), c.Args().Get(1)
	edge, err := volume.ParseEdge(c.String(flagEdge.Name))
	if err != nil {
		return usageErrorf("--edge: %v", err)
	}
	if c.Int(flagThreads.Name) < 0 {
		return usageErrorf("--threads %d: want 0 (all cores) or more", c.Int(flagThreads.Name))
	}
	maxMem, err := maxBufferBytes(c)
	if err != nil {
		return err
	}
	in, err := openInput(c, inPath)
	if err != nil {
		return err
	}
	defer in.Close()
	h := in.Header()
	fj, err := build(c, h)
	if err != nil {
		return err
	}
	outH := h
	outH.Type = fj.outType
	if s := c.String(flagOutType.Name); s != "" {
		if outH.Type, err = volume.ParseSampleType(s); err != nil {
			return usageErrorf("--type: %v", err)
		}
	}
	job := &streamJob{
		name: name, inPath: inPath, outPath: outPath, in: in, outH: outH,
		plans: fj.plans, combine: fj.combine, what: fj.what,
		opt: volume.FilterOptions{
			Edge:           edge,
			Fill:           c.Float64(flagFill.Name),
			Threads:        c.Int(flagThreads.Name),
			MaxBufferBytes: maxMem,
		},
	}
	if skip, err := job.setShard(c); skip || err != nil {
		return err
	}
	_, err = job.run(c)
	if errors.Is(err, volume.ErrMemory) {
		return &exitError{ExitFailure, fmt.Errorf("%w; give more with --max-memory SIZE, or use a narrower kernel", err)}
	}
	return err
}

// parseWidths turns a --sigma or similar value ("2", "1,1,3", "1.5um", "0.5,0.5,2um")
// into widths in voxels along x, y and z, converting physical units with the stack's
// spacing so that anisotropic voxels get the right widths.
func parseWidths(flag, s string, h volume.Header) ([3]float64, error) {
	v, unit, err := volume.ParseTriple(s)
	if err != nil {
		return v, usageErrorf("--%s: %v", flag, err)
	}
	for _, x := range v {
		if x < 0 {
			return v, usageErrorf("--%s %q: widths cannot be negative", flag, s)
		}
	}
	if unit == "" {
		return v, nil
	}
	if h.Unit == "" {
		return v, usageErrorf("--%s %q is in %s, but the stack's voxel spacing is unknown; give it with --spacing X,Y,Z%s", flag, s, unit, unit)
	}
	for i := range v {
		phys, err := volume.ConvertLength(v[i], unit, h.Unit)
		if err != nil {
			return v, usageErrorf("--%s: %v", flag, err)
		}
		v[i] = phys / h.Normalize().Spacing[i]
	}
	return v, nil
}

func fmtWidths(v [3]float64) string {
	return fmt.Sprintf("%s,%s,%s voxels", g(v[0]), g(v[1]), g(v[2]))
}

// scalePlan multiplies the kernel a plan applies by s (folded into its z taps).
func scalePlan(p *tensor.Plan, s float64) *tensor.Plan {
	q := *p
	q.Kernel = p.Kernel.Clone()
	for i := range q.Kernel.Data {
		q.Kernel.Data[i] *= s
	}
	q.Branches = make([]tensor.Branch, len(p.Branches))
	for i, b := range p.Branches {
		nb := tensor.Branch{First: b.First, Leaves: make([]tensor.Leaf, len(b.Leaves))}
		for j, l := range b.Leaves {
			z := make([]float64, len(l.Z))
			for k, v := range l.Z {
				z[k] = v * s
			}
			nb.Leaves[j] = tensor.Leaf{Second: l.Second, Z: z}
		}
		q.Branches[i] = nb
	}
	return &q
}

// --- smooth ---------------------------------------------------------------------------

var smoothCommand = &cli.Command{
	Name:      "smooth",
	Usage:     "Gaussian or mean (box) smoothing in voxels or physical units",
	ArgsUsage: "IN OUT",
	Description: `Smooths IN with a sampled Gaussian (--sigma) or a mean over a box (--box) and
writes OUT in IN's sample type (rounded to nearest and clamped; the clamped count is
reported). Sizes are in voxels, or in physical units with a suffix (nm, um, mm),
converted per axis with the stack's spacing so that anisotropic voxels are smoothed
by the same physical width along every axis. The Gaussian is cut at 4 sigma
(common practice).

Examples:
   tripass smooth core.tif core-smooth.tif --sigma 12um
   tripass smooth stack.tif out.tif --sigma 1,1,0.3
   tripass smooth stack.tif out.tif --box 3 --edge replicate`,
	Flags: filterFlags("the input's type",
		&cli.StringFlag{Name: "sigma", Category: "Filter", Usage: "Gaussian standard deviation `S` or X,Y,Z; in voxels, or with a unit (e.g. 2um)"},
		&cli.StringFlag{Name: "box", Category: "Filter", Usage: "mean over a box of `N` or X,Y,Z voxels (odd sizes)"},
	),
	Action: func(c *cli.Context) error { return runFilter(c, "smooth", buildSmooth) },
}

func buildSmooth(c *cli.Context, h volume.Header) (*filterJob, error) {
	sigma, box := c.String("sigma"), c.String("box")
	switch {
	case sigma != "" && box != "":
		return nil, usageErrorf("give --sigma or --box, not both")
	case sigma != "":
		s, err := parseWidths("sigma", sigma, h)
		if err != nil {
			return nil, err
		}
		return &filterJob{
			plans:   []*tensor.Plan{tensor.GaussianPlan(s, [3]int{})},
			outType: h.Type,
			what:    "Gaussian, sigma " + fmtWidths(s),
		}, nil
	case box != "":
		v, unit, err := volume.ParseTriple(box)
		if err != nil || unit != "" {
			return nil, usageErrorf("--box %q: want N or X,Y,Z in voxels (odd whole numbers)", box)
		}
		var n [3]int
		for i, x := range v {
			n[i] = int(x)
			if float64(n[i]) != x || n[i] < 1 || n[i]%2 == 0 {
				return nil, usageErrorf("--box %q: sizes must be odd whole numbers of voxels", box)
			}
		}
		return &filterJob{
			plans:   []*tensor.Plan{tensor.BoxPlan(n)},
			outType: h.Type,
			what:    fmt.Sprintf("mean over %d×%d×%d voxels", n[0], n[1], n[2]),
		}, nil
	}
	return nil, usageErrorf("smooth needs --sigma S or --box N")
}

// --- gradient -------------------------------------------------------------------------

var gradientCommand = &cli.Command{
	Name:      "gradient",
	Usage:     "intensity gradient (Sobel or derivative of Gaussian): one component or the magnitude",
	ArgsUsage: "IN OUT",
	Description: `Computes the gradient of IN and writes one component or its magnitude as float32.
Calibrated so that a ramp rising by 1 per voxel along an axis reads 1.0 on that axis;
--physical divides by the spacing, giving intensity per physical unit (per um, say).
The Sobel operator is the central difference along the axis with [1,2,1] smoothing
across the other two, divided by 32; --operator gaussian uses the derivative of a
Gaussian of --sigma instead (less noise, wider support).

Examples:
   tripass gradient core.tif grad.tif
   tripass gradient core.tif gz.tif --component z --physical
   tripass gradient stack.tif grad.tif --operator gaussian --sigma 1.5um`,
	Flags: filterFlags("float32",
		&cli.StringFlag{Name: "operator", Category: "Filter", Value: "sobel", Usage: "derivative `OPERATOR`: sobel or gaussian"},
		&cli.StringFlag{Name: "sigma", Category: "Filter", Usage: "Gaussian standard deviation `S` or X,Y,Z for --operator gaussian; voxels or with a unit"},
		&cli.StringFlag{Name: "component", Category: "Filter", Value: "magnitude", Usage: "`COMPONENT` to write: x, y, z or magnitude"},
		&cli.BoolFlag{Name: "physical", Category: "Filter", Usage: "divide by the voxel spacing: intensity per physical unit instead of per voxel"},
	),
	Action: func(c *cli.Context) error { return runFilter(c, "gradient", buildGradient) },
}

func buildGradient(c *cli.Context, h volume.Header) (*filterJob, error) {
	axes := []int{0, 1, 2}
	comp := strings.ToLower(c.String("component"))
	switch comp {
	case "x":
		axes = []int{0}
	case "y":
		axes = []int{1}
	case "z":
		axes = []int{2}
	case "magnitude", "mag":
	default:
		return nil, usageErrorf("--component %q: want x, y, z or magnitude", comp)
	}
	sp := h.Normalize().Spacing
	if c.Bool("physical") && h.Unit == "" && c.String(flagSpacing.Name) == "" {
		return nil, usageErrorf("--physical needs the voxel spacing, which the stack does not give; add --spacing X,Y,Z[unit]")
	}
	job := &filterJob{outType: volume.Float32, combine: volume.CombineMagnitude}
	if len(axes) == 1 {
		job.combine = volume.CombineNone
	}
	op := strings.ToLower(c.String("operator"))
	var sigma [3]float64
	switch op {
	case "sobel":
		if c.String("sigma") != "" {
			return nil, usageErrorf("--sigma applies to --operator gaussian only")
		}
		job.what = "Sobel"
	case "gaussian":
		if c.String("sigma") == "" {
			return nil, usageErrorf("--operator gaussian needs --sigma")
		}
		var err error
		if sigma, err = parseWidths("sigma", c.String("sigma"), h); err != nil {
			return nil, err
		}
		job.what = "derivative of Gaussian, sigma " + fmtWidths(sigma)
	default:
		return nil, usageErrorf("--operator %q: want sobel or gaussian", op)
	}
	for _, a := range axes {
		var p *tensor.Plan
		scale := 1.0
		if op == "sobel" {
			// [−1,0,1] reads 2 per unit slope and each [1,2,1] sums to 4: 2·4·4 = 32.
			p, scale = tensor.SobelPlan(a), 1.0/32
		} else {
			var order [3]int
			order[a] = 1
			p = tensor.GaussianPlan(sigma, order)
		}
		if c.Bool("physical") {
			scale /= sp[a]
		}
		job.plans = append(job.plans, scalePlan(p, scale))
	}
	job.what += ", " + comp
	if c.Bool("physical") {
		job.what += fmt.Sprintf(" (per %s)", h.Unit)
	}
	return job, nil
}

// --- laplace --------------------------------------------------------------------------

var laplaceCommand = &cli.Command{
	Name:      "laplace",
	Usage:     "Laplacian: the 7-point stencil, or the Laplacian of Gaussian with --sigma",
	ArgsUsage: "IN OUT",
	Description: `Writes the Laplacian of IN as float32: without --sigma the 7-point stencil (the sum
of [1,−2,1] along each axis), with --sigma the Laplacian of a Gaussian of that width
(voxels or physical units), applied as three separable terms.

Examples:
   tripass laplace stack.tif lap.tif
   tripass laplace tissue.tif log.tif --sigma 3um`,
	Flags: filterFlags("float32",
		&cli.StringFlag{Name: "sigma", Category: "Filter", Usage: "Gaussian standard deviation `S` or X,Y,Z for the Laplacian of Gaussian; voxels or with a unit"},
	),
	Action: func(c *cli.Context) error { return runFilter(c, "laplace", buildLaplace) },
}

func buildLaplace(c *cli.Context, h volume.Header) (*filterJob, error) {
	if s := c.String("sigma"); s != "" {
		sigma, err := parseWidths("sigma", s, h)
		if err != nil {
			return nil, err
		}
		return &filterJob{plans: []*tensor.Plan{tensor.LoGPlan(sigma)}, outType: volume.Float32,
			what: "Laplacian of Gaussian, sigma " + fmtWidths(sigma)}, nil
	}
	return &filterJob{plans: []*tensor.Plan{tensor.Laplace7Plan()}, outType: volume.Float32,
		what: "7-point Laplacian stencil"}, nil
}

// --- dog ------------------------------------------------------------------------------

var dogCommand = &cli.Command{
	Name:      "dog",
	Usage:     "difference of Gaussians (sigma minus sigma2), a band-pass for blobs",
	ArgsUsage: "IN OUT",
	Description: `Writes G(sigma) − G(sigma2) applied to IN, as float32: with sigma < sigma2 it
keeps structures between the two widths (nuclei, grains) and removes slow background.
Widths in voxels or physical units.

Example:
   tripass dog tissue.tif blobs.tif --sigma 2um --sigma2 6um`,
	Flags: filterFlags("float32",
		&cli.StringFlag{Name: "sigma", Category: "Filter", Usage: "width of the first (usually narrower) Gaussian, `S` or X,Y,Z; voxels or with a unit (required)"},
		&cli.StringFlag{Name: "sigma2", Category: "Filter", Usage: "width of the Gaussian subtracted, `S` or X,Y,Z; voxels or with a unit (required)"},
	),
	Action: func(c *cli.Context) error { return runFilter(c, "dog", buildDoG) },
}

func buildDoG(c *cli.Context, h volume.Header) (*filterJob, error) {
	if c.String("sigma") == "" || c.String("sigma2") == "" {
		return nil, usageErrorf("dog needs both --sigma and --sigma2")
	}
	s1, err := parseWidths("sigma", c.String("sigma"), h)
	if err != nil {
		return nil, err
	}
	s2, err := parseWidths("sigma2", c.String("sigma2"), h)
	if err != nil {
		return nil, err
	}
	return &filterJob{plans: []*tensor.Plan{tensor.DoGPlan(s1, s2)}, outType: volume.Float32,
		what: "difference of Gaussians, sigma " + fmtWidths(s1) + " minus " + fmtWidths(s2)}, nil
}

// --- convolve -------------------------------------------------------------------------

var convolveCommand = &cli.Command{
	Name:      "convolve",
	Usage:     "convolve with any 3D kernel from a file, in its cheapest exact-enough form",
	ArgsUsage: "IN OUT",
	Description: `Convolves IN with the kernel in --kernel (.npy, shape (kz, ky, kx), or tripass's
text format; see 'tripass kernel'), writing float32. The kernel is analysed first: it
is applied directly, as a sum of separable terms (CP) or in Tucker form, whichever is
cheapest among the forms whose relative error stays within --tolerance; --form forces
one. The chosen plan, its predicted error and its cost go to stderr. True convolution:
the kernel is mirrored, as the mathematical definition has it.

Examples:
   tripass convolve stack.tif out.tif --kernel psf.npy
   tripass convolve stack.tif out.tif --kernel psf.npy --tolerance 1e-3 --form tucker`,
	Flags: filterFlags("float32",
		&cli.StringFlag{Name: "kernel", Category: "Filter", Usage: "the kernel to apply: a .npy or text `FILE` (see 'tripass kernel make --help')", Required: true},
		&cli.Float64Flag{Name: "tolerance", Category: "Filter", Value: 1e-6, Usage: "largest relative (Frobenius) `ERROR` allowed for a separable form"},
		&cli.StringFlag{Name: "form", Category: "Filter", Usage: "force a `FORM`: direct, cp or tucker (default: the cheapest within --tolerance)"},
	),
	Action: func(c *cli.Context) error { return runFilter(c, "convolve", buildConvolve) },
}

func buildConvolve(c *cli.Context, h volume.Header) (*filterJob, error) {
	tol := c.Float64("tolerance")
	if !(tol >= 0 && tol < 1) || math.IsNaN(tol) {
		return nil, usageErrorf("--tolerance %g: want a relative error in [0, 1)", tol)
	}
	k, err := loadKernel(c.String("kernel"))
	if err != nil {
		return nil, err
	}
	opt := analyzeOptions(k, tol)
	if f := c.String("form"); f != "" {
		form, err := tensor.ParseForm(f)
		if err != nil {
			return nil, usageErrorf("--form: %v", err)
		}
		opt.Force = &form
	}
	a, err := tensor.Analyze(k, opt)
	if err != nil {
		return nil, inputError(fmt.Errorf("%s: %w", c.String("kernel"), err))
	}
	ch := a.Chosen
	d := k.Dims()
	direct := k.NonZero()
	what := fmt.Sprintf("kernel %s (%d×%d×%d), plan %s", c.String("kernel"), d[0], d[1], d[2], describeOption(ch))
	what += fmt.Sprintf(", relative error %.2e, %d multiply-adds per voxel (direct: %d, %.1f× fewer)",
		ch.Plan.RelError, ch.Plan.Macs(), direct, float64(direct)/math.Max(1, float64(ch.Plan.Macs())))
	return &filterJob{plans: []*tensor.Plan{ch.Plan}, outType: volume.Float32, what: what}, nil
}

// describeOption names a planner option in a few words ("tucker (9,1,9) order yxz").
func describeOption(o *tensor.Option) string {
	switch o.Form {
	case tensor.CP:
		if o.Terms == 1 {
			return "cp, 1 separable term"
		}
		return fmt.Sprintf("cp, %d separable terms", o.Terms)
	case tensor.Tucker:
		return fmt.Sprintf("tucker, ranks (%d,%d,%d), order %s", o.Ranks[0], o.Ranks[1], o.Ranks[2], o.Order)
	}
	return "direct"
}

func init() {
	register(smoothCommand)
	register(gradientCommand)
	register(laplaceCommand)
	register(dogCommand)
	register(convolveCommand)
}
