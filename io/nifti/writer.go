package nifti

import (
	"bufio"
	"compress/flate"
	"fmt"
	"io"
	"math"
	"strings"
	"unicode/utf8"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// writeBufSize is the write buffer between the encoder and the file (common practice:
// large enough that system calls cost nothing beside moving the bytes).
const writeBufSize = 1 << 20

// gzipLevel is the compression level of .nii.gz output: the fastest, as nibabel
// writes by default (nibabel.openers.Opener.default_compresslevel = 1, nibabel 5.0).
// Image data compress little better at higher levels and much more slowly.
const gzipLevel = flate.BestSpeed

// maxDim is the largest size along an axis that NIfTI-1's int16 dim fields can hold.
const maxDim = math.MaxInt16

// WriteOptions say how Create writes a NIfTI-1 file.
type WriteOptions struct {
	// Orientation is written unchanged into the qform and sform fields (and pixdim[0]);
	// pass an input's Orientation to give the output the input's placement in the
	// world. Its coordinates are taken to be in the unit of the header's spacing. nil
	// writes PlainOrientation(h): a plain scaling by the spacing.
	Orientation *Orientation
	// Description goes into the header's descrip field, cut to 79 bytes.
	Description string
	// Overwrite allows replacing an existing file; it is replaced only by a successful
	// Close.
	Overwrite bool
}

// Writer writes a NIfTI-1 volume slice by slice: a little-endian single-file image
// with the data right after the header (vox_offset 352, no extensions), gzip-compressed
// as it goes when the name ends in .nii.gz (in parallel, one gzip member; see
// gzipStream). It implements volume.Sink: the file is
// written under a temporary name beside the target and renamed to the target only by a
// successful Close after all NZ slices. A Writer is not safe for concurrent use.
type Writer struct {
	path   string
	f      *atomicfile.File
	bw     *bufio.Writer
	gz     *gzipStream // nil for .nii
	w      io.Writer   // gz or bw
	h      volume.Header
	z      int
	err    error
	closed bool
}

var _ volume.Sink = (*Writer)(nil)

// Create starts a NIfTI-1 file at path, which must end in .nii or .nii.gz (any case),
// for a volume described by h. Samples are stored in h's type (uint8, int16, uint16,
// int32, uint32, float32, float64) without scaling; the spacing goes into pixdim[1..3]
// with its unit in xyzt_units (nm is written as µm and cm as mm, the units NIfTI-1 can
// name; no unit is written as unknown). An existing file at path is an error wrapping
// atomicfile.ErrExists unless opt.Overwrite is set.
func Create(path string, h volume.Header, opt WriteOptions) (*Writer, error) {
	lower := strings.ToLower(path)
	compressed := strings.HasSuffix(lower, ".nii.gz")
	if !compressed && !strings.HasSuffix(lower, ".nii") {
		return nil, &UnsupportedError{Path: path, Msg: "a NIfTI-1 output's name must end in .nii or .nii.gz"}
	}
	if err := h.Validate(); err != nil {
		return nil, fmt.Errorf("nifti: %s: %w", path, err)
	}
	if h.NX > maxDim || h.NY > maxDim || h.NZ > maxDim {
		return nil, &UnsupportedError{Path: path, Msg: fmt.Sprintf(
			"NIfTI-1 holds at most %d voxels along an axis; %d×%d×%d does not fit (write TIFF or raw instead)", maxDim, h.NX, h.NY, h.NZ)}
	}
	if sp, _ := spacingInFileUnit(h); math.IsInf(float64(float32(sp[0])), 0) ||
		math.IsInf(float64(float32(sp[1])), 0) || math.IsInf(float64(float32(sp[2])), 0) {
		return nil, &UnsupportedError{Path: path, Msg: fmt.Sprintf("spacing %v %s is beyond NIfTI-1's float32 pixdim", h.Spacing, h.Unit)}
	}
	o := PlainOrientation(h)
	if opt.Orientation != nil {
		o = *opt.Orientation
	}
	f, err := atomicfile.Create(path, opt.Overwrite)
	if err != nil {
		return nil, fmt.Errorf("nifti: %w", err)
	}
	w := &Writer{path: path, f: f, bw: bufio.NewWriterSize(f, writeBufSize), h: h}
	w.w = w.bw
	if compressed {
		// Compressed in parallel, one gzip member; a zero modification time and no
		// name keep the output the same for the same input, as nibabel's
		// DeterministicGzipFile does.
		if w.gz, err = newGzipStream(w.bw, gzipLevel); err != nil {
			f.Abort()
			return nil, fmt.Errorf("nifti: %s: %w", path, err)
		}
		w.w = w.gz
	}
	if _, err := w.w.Write(encodeHeader(h, o, descripField(opt.Description))); err != nil {
		w.Abort()
		return nil, fmt.Errorf("nifti: %s: writing the header: %w", path, err)
	}
	return w, nil
}

// descripField cuts s to the 79 bytes of text the descrip field holds before its
// terminating NUL, at a character boundary and before any NUL in s.
func descripField(s string) string {
	if i := strings.IndexByte(s, 0); i >= 0 {
		s = s[:i]
	}
	if len(s) <= descripLen-1 {
		return s
	}
	s = s[:descripLen-1]
	for len(s) > 0 && !utf8.ValidString(s) {
		s = s[:len(s)-1]
	}
	return s
}

// WriteSlice writes the next slice, which must have the header's size and sample type
// (convert it first with volume.Convert). src is not modified.
func (w *Writer) WriteSlice(src *volume.Slice) error {
	switch {
	case w.closed:
		return fmt.Errorf("nifti: %s: write after Close or Abort", w.path)
	case w.err != nil:
		return w.err
	case w.z >= w.h.NZ:
		return fmt.Errorf("nifti: %s: slice %d written to a volume of %d slices", w.path, w.z, w.h.NZ)
	case src.NX != w.h.NX || src.NY != w.h.NY || src.Type != w.h.Type:
		return fmt.Errorf("nifti: %s: slice %d is %d×%d %v, the volume is %d×%d %v",
			w.path, w.z, src.NX, src.NY, src.Type, w.h.NX, w.h.NY, w.h.Type)
	}
	// Slices are little-endian, as the file is.
	if _, err := w.w.Write(src.Data[:w.h.SliceBytes()]); err != nil {
		w.err = fmt.Errorf("nifti: %s: writing slice %d: %w", w.path, w.z, err)
		return w.err
	}
	w.z++
	return nil
}

// Close commits the volume: it ends the gzip stream, flushes and syncs the temporary
// file and renames it to the target. If fewer than NZ slices were written, or a write
// failed, it discards the output instead and returns the error (wrapping
// volume.ErrShortVolume for missing slices), leaving nothing under the target's name.
func (w *Writer) Close() error {
	if w.closed {
		return fmt.Errorf("nifti: %s: Close after Close or Abort", w.path)
	}
	w.closed = true
	if w.err != nil {
		w.discard()
		return w.err
	}
	if w.z < w.h.NZ {
		w.discard()
		return fmt.Errorf("nifti: %s: %d of %d slices written: %w", w.path, w.z, w.h.NZ, volume.ErrShortVolume)
	}
	if w.gz != nil {
		if err := w.gz.Close(); err != nil {
			w.discard()
			return fmt.Errorf("nifti: %s: writing: %w", w.path, err)
		}
	}
	if err := w.bw.Flush(); err != nil {
		w.discard()
		return fmt.Errorf("nifti: %s: writing: %w", w.path, err)
	}
	if err := w.f.Commit(); err != nil {
		return fmt.Errorf("nifti: %s: committing: %w", w.path, err)
	}
	return nil
}

// Abort discards the output: the temporary file is removed and nothing appears under
// the target's name. It may be called after a failed WriteSlice or Close, and more
// than once; after a successful Close it does nothing.
func (w *Writer) Abort() error {
	w.closed = true
	if err := w.discard(); err != nil {
		return fmt.Errorf("nifti: %s: removing the partial output: %w", w.path, err)
	}
	return nil
}

// discard stops the compressing goroutines and removes the temporary file.
func (w *Writer) discard() error {
	if w.gz != nil {
		w.gz.Abort()
	}
	return w.f.Abort()
}
