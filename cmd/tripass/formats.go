package main

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/urfave/cli/v2"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/nifti"
	"github.com/tripass/tripass/io/rawstack"
	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

// kind is a stack layout on disk, picked from a path.
type kind int

const (
	kindTIFF   kind = iota // one multi-page TIFF or BigTIFF file
	kindFolder             // a folder of single-page TIFF slices
	kindRaw                // headerless binary
	kindNIfTI              // NIfTI-1, .nii or .nii.gz
)

func (k kind) String() string {
	return [...]string{"multi-page TIFF", "folder of TIFF slices", "raw binary", "NIfTI-1"}[k]
}

// The format table: which layout a path names. An existing folder or a path ending in
// a separator is a slice folder; otherwise the extension decides.
func kindOf(path string) (kind, error) {
	if strings.HasSuffix(path, "/") || strings.HasSuffix(path, string(filepath.Separator)) {
		return kindFolder, nil
	}
	if st, err := os.Stat(path); err == nil && st.IsDir() {
		return kindFolder, nil
	}
	lower := strings.ToLower(path)
	switch {
	case strings.HasSuffix(lower, ".tif"), strings.HasSuffix(lower, ".tiff"),
		strings.HasSuffix(lower, ".btf"), strings.HasSuffix(lower, ".tf8"):
		return kindTIFF, nil
	case strings.HasSuffix(lower, ".raw"), strings.HasSuffix(lower, ".bin"):
		return kindRaw, nil
	case strings.HasSuffix(lower, ".nii"), strings.HasSuffix(lower, ".nii.gz"):
		return kindNIfTI, nil
	}
	return 0, usageErrorf("%s: cannot tell the stack format from the name (want .tif/.tiff, .raw, .nii/.nii.gz, or a folder ending in /)", path)
}

// Input flags, shared by every command that reads a stack.
var (
	flagSpacing = &cli.StringFlag{
		Name:     "spacing",
		Category: "Input",
		Usage:    "voxel spacing `X,Y,Z` with a unit (nm, um, mm), e.g. 0.65,0.65,2um; overrides what the file says",
	}
	flagRawSize = &cli.StringFlag{
		Name:     "raw-size",
		Category: "Raw input",
		Usage:    "size of a raw input in voxels, `NX,NY,NZ` (required for .raw)",
	}
	flagRawType = &cli.StringFlag{
		Name:     "raw-type",
		Category: "Raw input",
		Value:    "uint16",
		Usage:    "sample `TYPE` of a raw input: uint8, uint16, int16, uint32, int32, float32, float64",
	}
	flagRawEndian = &cli.StringFlag{
		Name:     "raw-endian",
		Category: "Raw input",
		Value:    "little",
		Usage:    "byte `ORDER` of a raw input or output: little or big",
	}
	flagRawOffset = &cli.Int64Flag{
		Name:     "raw-offset",
		Category: "Raw input",
		Usage:    "`BYTES` to skip at the start of a raw input (a header tripass ignores)",
	}
)

// Output flags, shared by every command that writes a stack.
var (
	flagCompress = &cli.StringFlag{
		Name:     "compress",
		Category: "Output",
		Value:    "none",
		Usage:    "`METHOD` of compressing TIFF output: none, lzw or deflate (lossless; lzw and deflate use the horizontal predictor for integer samples)",
	}
	flagBigTIFF = &cli.BoolFlag{
		Name:     "bigtiff",
		Category: "Output",
		Usage:    "write BigTIFF (64-bit offsets) even when the file stays under 4 GiB; chosen by itself above that",
	}
	flagOverwrite = &cli.BoolFlag{
		Name:     "overwrite",
		Category: "Output",
		Usage:    "replace an existing output (it is replaced only when the new one is complete)",
	}
)

func inputFlags() []cli.Flag {
	return []cli.Flag{flagSpacing, flagRawSize, flagRawType, flagRawEndian, flagRawOffset}
}

func outputFlags() []cli.Flag {
	return []cli.Flag{flagCompress, flagBigTIFF, flagOverwrite, flagResume}
}

// input is an open stack with what the command line said about it.
type input struct {
	volume.Source
	path string
	kind kind
	h    volume.Header // the source's header with --spacing applied
}

// Header returns the header with the spacing given on the command line, if any.
func (in *input) Header() volume.Header { return in.h }

// openInput opens the stack at path in the layout its name implies.
func openInput(c *cli.Context, path string) (*input, error) {
	k, err := kindOf(path)
	if err != nil {
		return nil, err
	}
	if _, err := os.Stat(path); err != nil {
		return nil, ioError(fmt.Errorf("%s: %w", path, unwrapPathError(err)))
	}
	var src volume.Source
	switch k {
	case kindTIFF:
		src, err = tiffstack.Open(path)
	case kindFolder:
		src, err = tiffstack.OpenFolder(path)
	case kindNIfTI:
		src, err = nifti.Open(path)
	case kindRaw:
		var h volume.Header
		var order binary.ByteOrder
		h, order, err = rawInputHeader(c)
		if err != nil {
			return nil, err
		}
		src, err = rawstack.Open(path, h, order, c.Int64(flagRawOffset.Name))
	}
	if err != nil {
		return nil, classifyOpenError(path, err)
	}
	in := &input{Source: src, path: path, kind: k, h: src.Header()}
	if s := c.String(flagSpacing.Name); s != "" {
		v, unit, err := volume.ParseTriple(s)
		if err != nil {
			src.Close()
			return nil, usageErrorf("--spacing: %v", err)
		}
		for _, x := range v {
			if x <= 0 {
				src.Close()
				return nil, usageErrorf("--spacing: %q: spacings must be positive", s)
			}
		}
		in.h.Spacing, in.h.Unit = v, unit
	}
	return in, nil
}

// classifyOpenError gives an open error the file name (once) and an exit code.
func classifyOpenError(path string, err error) error {
	if err == nil {
		return nil
	}
	var ee *exitError
	if errors.As(err, &ee) {
		return err
	}
	var pe *os.PathError
	if errors.As(err, &pe) && !strings.Contains(err.Error(), "tiff:") {
		return ioError(err)
	}
	if !strings.Contains(err.Error(), path) {
		err = fmt.Errorf("%s: %w", path, err)
	}
	return inputError(err)
}

func unwrapPathError(err error) error {
	var pe *os.PathError
	if errors.As(err, &pe) {
		return pe.Err
	}
	return err
}

// rawInputHeader builds the header of a raw input from the --raw-* flags.
func rawInputHeader(c *cli.Context) (volume.Header, binary.ByteOrder, error) {
	var h volume.Header
	s := c.String(flagRawSize.Name)
	if s == "" {
		return h, nil, usageErrorf("a .raw input needs --raw-size NX,NY,NZ (and --raw-type, --raw-endian, --raw-offset if not the defaults)")
	}
	parts := strings.Split(s, ",")
	if len(parts) != 3 {
		return h, nil, usageErrorf("--raw-size %q: want NX,NY,NZ", s)
	}
	var n [3]int
	for i, p := range parts {
		v, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || v <= 0 {
			return h, nil, usageErrorf("--raw-size %q: %q is not a positive whole number", s, p)
		}
		n[i] = v
	}
	t, err := volume.ParseSampleType(c.String(flagRawType.Name))
	if err != nil {
		return h, nil, usageErrorf("--raw-type: %v", err)
	}
	order, err := byteOrder(c.String(flagRawEndian.Name))
	if err != nil {
		return h, nil, err
	}
	h = volume.Header{NX: n[0], NY: n[1], NZ: n[2], Type: t}
	if err := h.Validate(); err != nil {
		return h, nil, usageErrorf("--raw-size %q: %v", s, err)
	}
	return h, order, nil
}

func byteOrder(s string) (binary.ByteOrder, error) {
	switch strings.ToLower(s) {
	case "little", "le", "":
		return binary.LittleEndian, nil
	case "big", "be":
		return binary.BigEndian, nil
	}
	return nil, usageErrorf("--raw-endian %q: want little or big", s)
}

// outputOptions says how createOutput writes a stack.
type outputOptions struct {
	// Orientation carries a NIfTI input's qform/sform through to a NIfTI output.
	Orientation *nifti.Orientation
	// ResumeAt > 0 continues the partial output of an interrupted run after that many
	// slices, which end at byte ResumeSize of the file (journal.go).
	ResumeAt   int
	ResumeSize int64
}

// createOutput opens a sink at path for a volume described by h, refusing a path that
// is one of the inputs.
func createOutput(c *cli.Context, path string, h volume.Header, opt outputOptions, inputs ...string) (volume.Sink, error) {
	for _, in := range inputs {
		if samePath(in, path) {
			return nil, usageErrorf("%s: the output is also an input; choose another output name (inputs are never modified)", path)
		}
	}
	k, err := kindOf(path)
	if err != nil {
		return nil, err
	}
	overwrite := c.Bool(flagOverwrite.Name)
	var sink volume.Sink
	switch k {
	case kindTIFF, kindFolder:
		wo, werr := tiffOptions(c, h)
		if werr != nil {
			return nil, werr
		}
		wo.Overwrite = overwrite
		// Outputs are resumable (resume.go in each format package): their partial
		// files have fixed names that --resume finds again.
		switch {
		case k == kindFolder && opt.ResumeAt > 0:
			sink, err = tiffstack.ResumeFolder(strings.TrimRight(path, "/"), h, wo, opt.ResumeAt)
		case k == kindFolder:
			sink, err = tiffstack.CreateFolderResumable(strings.TrimRight(path, "/"), h, wo)
		case opt.ResumeAt > 0:
			sink, err = tiffstack.Resume(path, h, wo, opt.ResumeAt, opt.ResumeSize)
		default:
			sink, err = tiffstack.CreateResumable(path, h, wo)
		}
	case kindRaw:
		order, oerr := byteOrder(c.String(flagRawEndian.Name))
		if oerr != nil {
			return nil, oerr
		}
		if opt.ResumeAt > 0 {
			sink, err = rawstack.Resume(path, h, order, overwrite, opt.ResumeAt)
		} else {
			sink, err = rawstack.CreateResumable(path, h, order, overwrite)
		}
	case kindNIfTI:
		no := nifti.WriteOptions{Orientation: opt.Orientation, Overwrite: overwrite, Description: "written by tripass " + version}
		if opt.ResumeAt > 0 {
			sink, err = nifti.Resume(path, h, no, opt.ResumeAt, opt.ResumeSize)
		} else {
			sink, err = nifti.CreateResumable(path, h, no)
		}
	}
	if err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return nil, usageErrorf("%v", err)
		}
		return nil, ioError(fmt.Errorf("%s: %w", path, unwrapPathError(err)))
	}
	return &output{Sink: sink, path: path}, nil
}

// samePath reports whether a and b name the same file or folder, also through
// symbolic links and different spellings of the path.
func samePath(a, b string) bool {
	ca, cb := canonical(a), canonical(b)
	if ca == cb {
		return true
	}
	sa, errA := os.Stat(a)
	sb, errB := os.Stat(b)
	return errA == nil && errB == nil && os.SameFile(sa, sb)
}

func canonical(p string) string {
	p = strings.TrimRight(p, "/")
	if abs, err := filepath.Abs(p); err == nil {
		p = abs
	}
	if r, err := filepath.EvalSymlinks(p); err == nil {
		return r
	}
	// The file may not exist yet: resolve its folder.
	if d, err := filepath.EvalSymlinks(filepath.Dir(p)); err == nil {
		return filepath.Join(d, filepath.Base(p))
	}
	return p
}

// ReadSlice reads the next slice, marking failures as input or I/O errors that name
// the file.
func (in *input) ReadSlice(dst *volume.Slice) error {
	err := in.Source.ReadSlice(dst)
	if err == nil || err == io.EOF {
		return err
	}
	return classifyOpenError(in.path, err)
}

// SeekSlice seeks when the underlying format can.
func (in *input) SeekSlice(z int) error {
	s, ok := in.Source.(volume.SliceSeeker)
	if !ok {
		return fmt.Errorf("%s: %s cannot seek", in.path, in.kind)
	}
	return classifyOpenError(in.path, s.SeekSlice(z))
}

// output is a sink whose failures are I/O errors naming the output.
type output struct {
	volume.Sink
	path string
}

func (o *output) WriteSlice(s *volume.Slice) error {
	return o.wrap(o.Sink.WriteSlice(s))
}

func (o *output) Close() error { return o.wrap(o.Sink.Close()) }

func (o *output) wrap(err error) error {
	if err == nil {
		return nil
	}
	if !strings.Contains(err.Error(), o.path) {
		err = fmt.Errorf("%s: %w", o.path, err)
	}
	return ioError(err)
}

// outputOptionsFrom carries what an input knows beyond its header (a NIfTI
// orientation) to the output.
func outputOptionsFrom(in *input) outputOptions {
	var o outputOptions
	if r, ok := in.Source.(*nifti.Reader); ok {
		or := r.Orientation()
		o.Orientation = &or
	}
	return o
}

// streamError returns err, which already carries its exit code and file name when it
// came from an input or output; anything else is a failure of the run.
func streamError(inPath, outPath string, err error) error {
	var ee *exitError
	if errors.As(err, &ee) {
		return err
	}
	return fmt.Errorf("%s → %s: %w", inPath, outPath, err)
}

// tiffOptions reads --compress and --bigtiff into TIFF writer settings; whole runs and
// shard parts use the same ones, so a joined file equals a whole run byte for byte.
func tiffOptions(c *cli.Context, h volume.Header) (tiffstack.WriteOptions, error) {
	wo := tiffstack.WriteOptions{BigTIFF: c.Bool(flagBigTIFF.Name)}
	switch strings.ToLower(c.String(flagCompress.Name)) {
	case "none", "":
		wo.Compression = tiffstack.None
	case "lzw":
		wo.Compression, wo.Predictor = tiffstack.LZW, !h.Type.IsFloat()
	case "deflate", "zip":
		wo.Compression, wo.Predictor = tiffstack.Deflate, !h.Type.IsFloat()
	default:
		return wo, usageErrorf("--compress %q: want none, lzw or deflate", c.String(flagCompress.Name))
	}
	return wo, nil
}
