package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/phantom"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

var demoCommand = &cli.Command{
	Name:      "demo",
	Usage:     "write a synthetic rock-core stack and run tripass's main jobs on it",
	ArgsUsage: "[DIR]",
	Description: `Writes a synthetic micro-CT stack of a porous rock core (16-bit, 6 × 6 × 10 µm
voxels: a cylinder of matrix with dense grains, pores and noise) into DIR
(default ./tripass-demo), then runs on it the commands a user would, printing each
command line before its output. Every file it writes lies in DIR; running it again
replaces them.

Examples:
   tripass demo
   tripass demo /tmp/tripass-demo --size 256,256,160`,
	Flags: []cli.Flag{
		&cli.StringFlag{Name: "size", Value: "192,192,128", Usage: "size of the synthetic stack in voxels, `NX,NY,NZ`"},
		&cli.Uint64Flag{Name: "seed", Value: 1, Usage: "`SEED` of the synthetic scene (the same seed gives the same stack)"},
		flagQuiet,
	},
	Action: demoAction,
}

func init() { register(demoCommand) }

// demoSteps are the commands the demo runs after writing its stack, with {dir} standing
// for the demo folder.
var demoSteps = [][]string{
	// Smooth by 9 µm along every axis: 1.5 voxels in x and y, 0.9 in z.
	{"smooth", "{dir}/rock-core.tif", "{dir}/rock-smooth.tif", "--sigma", "9um", "--overwrite"},
	{"gradient", "{dir}/rock-smooth.tif", "{dir}/rock-gradient.tif", "--physical", "--overwrite"},
	// A point-spread function elongated along z and tilted 30° about y.
	{"kernel", "make", "oriented-gaussian", "--sigma", "1,1,3", "--angles", "0,30,0", "-o", "{dir}/tilted-psf.npy", "--overwrite"},
	{"kernel", "inspect", "{dir}/tilted-psf.npy", "--tolerance", "1e-3", "--plot", "{dir}/tilted-psf.png", "--overwrite"},
	{"convolve", "{dir}/rock-core.tif", "{dir}/rock-psf.tif", "--kernel", "{dir}/tilted-psf.npy", "--tolerance", "1e-3", "--overwrite"},
	// Orthogonal sections before and after smoothing, at the same contrast.
	{"preview", "{dir}/rock-core.tif", "{dir}/rock-smooth.png", "--compare", "{dir}/rock-smooth.tif", "--overwrite"},
}

func demoAction(c *cli.Context) error {
	dir := "tripass-demo"
	if c.NArg() > 1 {
		return usageErrorf("demo takes at most one DIR argument")
	}
	if c.NArg() == 1 {
		dir = c.Args().First()
	}
	var n [3]int
	if _, err := fmt.Sscanf(c.String("size"), "%d,%d,%d", &n[0], &n[1], &n[2]); err != nil || n[0] < 8 || n[1] < 8 || n[2] < 4 {
		return usageErrorf("--size %q: want NX,NY,NZ, at least 8,8,4", c.String("size"))
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return ioError(err)
	}
	out := c.App.Writer
	stack := filepath.Join(dir, "rock-core.tif")
	fmt.Fprintf(out, "Writing a synthetic porous rock core, %d×%d×%d voxels of 6×6×10 µm, to %s\n", n[0], n[1], n[2], stack)
	src := phantom.RockCore(n[0], n[1], n[2], [3]float64{6, 6, 10}, c.Uint64("seed"))
	sink, err := tiffstack.Create(stack, src.Header(), tiffstack.WriteOptions{Compression: tiffstack.LZW, Predictor: true, Overwrite: true})
	if err != nil {
		return ioError(err)
	}
	if _, err := volume.Copy(sink, src, volume.Uint16, nil); err != nil {
		sink.Abort()
		return ioError(err)
	}
	if err := sink.Close(); err != nil {
		return ioError(err)
	}
	steps := append([][]string{{"info", "{dir}/rock-core.tif", "--stats"}}, demoSteps...)
	for _, step := range steps {
		args := make([]string, len(step))
		for i, a := range step {
			args[i] = strings.ReplaceAll(a, "{dir}", dir)
		}
		if c.Bool(flagQuiet.Name) && args[0] != "info" && args[0] != "kernel" {
			args = append(args, "--quiet")
		}
		fmt.Fprintf(out, "\n$ tripass %s\n", strings.Join(args, " "))
		if code := run(append([]string{"tripass"}, args...), out, c.App.ErrWriter); code != 0 {
			return fmt.Errorf("demo step 'tripass %s' failed (exit %d)", strings.Join(args, " "), code)
		}
	}
	fmt.Fprintf(out, "\nThe demo's files are in %s.\n", dir)
	return nil
}
