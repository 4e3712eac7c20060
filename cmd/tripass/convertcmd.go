package main

import (
	"encoding/json"
	"fmt"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/volume"
)

var convertCommand = &cli.Command{
	Name:      "convert",
	Usage:     "copy a stack into another format or sample type",
	ArgsUsage: "IN OUT",
	Description: `Streams IN to OUT slice by slice. The output format follows OUT's name: a folder
(an existing one or a name ending in /) gets one TIFF per slice, .tif/.tiff a multi-page
TIFF (BigTIFF by itself above 4 GiB), .raw headerless binary, .nii/.nii.gz NIfTI-1.
--type converts samples, rounding to nearest and clamping to the target's range; the
number of clamped voxels is reported.

Examples:
   tripass convert slices/ stack.tif --compress lzw
   tripass convert stack.tif stack.raw --type float32
   tripass convert scan.raw scan.tif --raw-size 512,512,300 --raw-type int16 --raw-endian big --spacing 0.1,0.1,0.1mm`,
	Flags: append(append([]cli.Flag{
		&cli.StringFlag{Name: "type", Usage: "sample `TYPE` of OUT: uint8, uint16, int16, uint32, int32, float32 or float64 (default: IN's type)"},
		flagQuiet, flagLog,
	}, inputFlags()...), append(outputFlags(), shardFlags()...)...),
	Action: convertAction,
}

func init() { register(convertCommand) }

func convertAction(c *cli.Context) error {
	if c.NArg() != 2 {
		return usageErrorf("convert takes IN and OUT, got %d arguments", c.NArg())
	}
	inPath, outPath := c.Args().Get(0), c.Args().Get(1)
	in, err := openInput(c, inPath)
	if err != nil {
		return err
	}
	defer in.Close()
	h := in.Header()
	if s := c.String("type"); s != "" {
		if h.Type, err = volume.ParseSampleType(s); err != nil {
			return usageErrorf("--type: %v", err)
		}
	}
	job := &streamJob{name: "convert", inPath: inPath, outPath: outPath, in: in, outH: h}
	if skip, err := job.setShard(c); skip || err != nil {
		return err
	}
	_, err = job.run(c)
	return err
}

// note prints an informational line on stderr unless --quiet was given.
// With --log json the line is a JSON object {"event":"note","command":…,"text":…}, so
// that a batch log stays machine-readable.
func note(c *cli.Context, format string, a ...any) {
	if c.Bool(flagQuiet.Name) {
		return
	}
	text := fmt.Sprintf(format, a...)
	if f, err := parseLogFormat(c.String(flagLog.Name)); err == nil && f == logJSON {
		json.NewEncoder(c.App.ErrWriter).Encode(struct {
			Event   string `json:"event"`
			Command string `json:"command"`
			Text    string `json:"text"`
		}{"note", commandName(c), text})
		return
	}
	fmt.Fprintln(c.App.ErrWriter, text)
}
