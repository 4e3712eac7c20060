package main

import (
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/volume"
)

var infoCommand = &cli.Command{
	Name:      "info",
	Usage:     "describe a stack: size, sample type, spacing, storage; --stats for value statistics",
	ArgsUsage: "STACK",
	Description: `Prints what a stack holds without reading its voxels (unless --stats is given):
size in voxels, sample type, voxel spacing and physical extent, data size, and how
the file stores it (compression, strips or tiles, page count).

Examples:
   tripass info core.tif
   tripass info core.tif --stats --json
   tripass info scan.raw --raw-size 512,512,300 --raw-type uint16 --spacing 6.5,6.5,6.5um`,
	Flags: append([]cli.Flag{
		&cli.BoolFlag{Name: "stats", Usage: "stream once over the voxels for min, max, mean, standard deviation and NaN/Inf counts"},
		&cli.BoolFlag{Name: "json", Usage: "print one JSON object instead of text"},
		flagQuiet, flagLog,
	}, inputFlags()...),
	Action: infoAction,
}

func init() { register(infoCommand) }

// stackInfo is what `tripass info --json` prints.
type stackInfo struct {
	Path        string     `json:"path"`
	Format      string     `json:"format"`
	Size        [3]int     `json:"size"`
	Type        string     `json:"type"`
	Spacing     [3]float64 `json:"spacing"`
	Unit        string     `json:"unit"`
	Bytes       int64      `json:"bytes"`
	Compression string     `json:"compression,omitempty"`
	Layout      string     `json:"layout,omitempty"`
	Pages       int        `json:"pages,omitempty"`
	Min         *float64   `json:"min,omitempty"`
	Max         *float64   `json:"max,omitempty"`
	Mean        *float64   `json:"mean,omitempty"`
	Std         *float64   `json:"std,omitempty"`
	NaN         *int64     `json:"nan,omitempty"`
	Inf         *int64     `json:"inf,omitempty"`
}

func infoAction(c *cli.Context) error {
	if c.NArg() != 1 {
		return usageErrorf("info takes one STACK argument, got %d", c.NArg())
	}
	path := c.Args().First()
	in, err := openInput(c, path)
	if err != nil {
		return err
	}
	defer in.Close()
	h := in.Header()
	info := stackInfo{
		Path:    path,
		Format:  in.kind.String(),
		Size:    [3]int{h.NX, h.NY, h.NZ},
		Type:    h.Type.String(),
		Spacing: h.Normalize().Spacing,
		Unit:    h.Unit,
		Bytes:   h.Bytes(),
	}
	info.Compression, info.Layout, info.Pages = storageDetails(in.Source)
	if info.Unit == "" {
		info.Unit = "voxel"
	}
	if c.Bool("stats") {
		p := newProgress(c, "stats", h)
		st, err := volume.ReadStats(progressSource{in, p})
		p.done()
		if err != nil {
			return inputError(fmt.Errorf("%s: %w", path, err))
		}
		info.Min, info.Max, info.Mean, info.Std = &st.Min, &st.Max, &st.Mean, &st.Std
		info.NaN, info.Inf = &st.NaN, &st.Inf
	}
	if c.Bool("json") {
		enc := json.NewEncoder(c.App.Writer)
		enc.SetIndent("", "  ")
		return enc.Encode(jsonSafe(info))
	}
	printInfo(c.App.Writer, info)
	return nil
}

// jsonSafe replaces infinite statistics (a volume holding ±Inf) with nil, since JSON
// has no infinity; the inf count says they were there.
func jsonSafe(info stackInfo) stackInfo {
	for _, p := range []**float64{&info.Min, &info.Max, &info.Mean, &info.Std} {
		if *p != nil && (math.IsInf(**p, 0) || math.IsNaN(**p)) {
			*p = nil
		}
	}
	return info
}

func printInfo(w io.Writer, in stackInfo) {
	u := in.Unit
	row := func(k, f string, a ...any) { fmt.Fprintf(w, "%-12s %s\n", k, fmt.Sprintf(f, a...)) }
	row("stack", "%s (%s)", in.Path, in.Format)
	row("size", "%d × %d × %d voxels (x × y × z)", in.Size[0], in.Size[1], in.Size[2])
	row("type", "%s", in.Type)
	row("spacing", "%s × %s × %s %s", g(in.Spacing[0]), g(in.Spacing[1]), g(in.Spacing[2]), u)
	row("extent", "%s × %s × %s %s", g(in.Spacing[0]*float64(in.Size[0])), g(in.Spacing[1]*float64(in.Size[1])),
		g(in.Spacing[2]*float64(in.Size[2])), u)
	row("data", "%s (%s per slice)", byteSize(in.Bytes), byteSize(in.Bytes/int64(in.Size[2])))
	if in.Compression != "" {
		row("compression", "%s", in.Compression)
	}
	if in.Layout != "" {
		row("layout", "%s", in.Layout)
	}
	if in.Min != nil {
		row("min", "%s", g(*in.Min))
		row("max", "%s", g(*in.Max))
		row("mean", "%s", g(*in.Mean))
		row("std", "%s", g(*in.Std))
		row("nan", "%d", *in.NaN)
		if *in.Inf > 0 {
			row("inf", "%d", *in.Inf)
		}
	}
}

func g(v float64) string { return strings.TrimSuffix(fmt.Sprintf("%.6g", v), ".") }

// byteSize formats n bytes with a binary unit.
func byteSize(n int64) string {
	const k = 1024
	switch {
	case n >= k*k*k:
		return fmt.Sprintf("%.2f GiB", float64(n)/(k*k*k))
	case n >= k*k:
		return fmt.Sprintf("%.1f MiB", float64(n)/(k*k))
	case n >= k:
		return fmt.Sprintf("%.1f KiB", float64(n)/k)
	}
	return fmt.Sprintf("%d B", n)
}
