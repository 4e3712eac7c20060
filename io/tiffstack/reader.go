package tiffstack

import (
	"encoding/binary"
	"fmt"
	"io"
	"os"
	"regexp"
	"strconv"
	"strings"

	"github.com/tripass/tripass/volume"
)

// Info describes how a stack is stored, for display (tripass info): everything about
// the file that the volume Header does not say.
type Info struct {
	BigTIFF      bool
	ByteOrder    binary.ByteOrder // binary.LittleEndian ("II") or binary.BigEndian ("MM")
	Compression  []string         // distinct compression names, in order of first use
	Predictor    []string         // distinct predictors of the compressed pages ("none", "horizontal differencing", "floating-point")
	Tiled        bool
	RowsPerStrip int // strips: rows per strip of the first page
	TileWidth    int // tiles: tile size of the first page
	TileLength   int
	Pages        int // image pages read as slices
	Skipped      int // reduced-resolution pages (thumbnails, pyramid levels) left out
	Files        int // slice folders: number of files; 0 for a single file
}

// Format is "BigTIFF" or "TIFF".
func (in Info) Format() string {
	if in.BigTIFF {
		return "BigTIFF"
	}
	return "TIFF"
}

// Order is "little-endian (II)" or "big-endian (MM)".
func (in Info) Order() string {
	if in.ByteOrder == binary.BigEndian {
		return "big-endian (MM)"
	}
	return "little-endian (II)"
}

// Layout is "strips of N rows" or "tiles of W×L".
func (in Info) Layout() string {
	if in.Tiled {
		return fmt.Sprintf("tiles of %d×%d", in.TileWidth, in.TileLength)
	}
	if in.RowsPerStrip == 1 {
		return "strips of 1 row"
	}
	return fmt.Sprintf("strips of %d rows", in.RowsPerStrip)
}

// String sums the Info up on one line.
func (in Info) String() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s, %s, compression %s", in.Format(), in.Order(), strings.Join(in.Compression, "+"))
	if len(in.Predictor) > 0 && !(len(in.Predictor) == 1 && in.Predictor[0] == "none") {
		fmt.Fprintf(&b, ", predictor %s", strings.Join(in.Predictor, "+"))
	}
	fmt.Fprintf(&b, ", %s, %d pages", in.Layout(), in.Pages)
	if in.Files > 0 {
		fmt.Fprintf(&b, " in %d files", in.Files)
	}
	if in.Skipped > 0 {
		fmt.Fprintf(&b, " (%d reduced-resolution pages skipped)", in.Skipped)
	}
	return b.String()
}

func (in *Info) add(p *page) {
	addName(&in.Compression, compressionName(p.compression))
	if p.compression != cNone && p.compression != cPackBits {
		addName(&in.Predictor, predictorName(p.predictor))
	}
}

func addName(list *[]string, s string) {
	for _, x := range *list {
		if x == s {
			return
		}
	}
	*list = append(*list, s)
}

// A Reader reads a multi-page TIFF or BigTIFF stack, one page per z-slice. It
// implements volume.Source and volume.SliceSeeker.
type Reader struct {
	f     *os.File
	name  string
	tf    *tiffFile
	pages []*page
	hdr   volume.Header
	info  Info
	z     int
	dec   decoder
}

var (
	_ volume.Source      = (*Reader)(nil)
	_ volume.SliceSeeker = (*Reader)(nil)
)

// Open opens a multi-page TIFF (TIFF 6.0) or BigTIFF stack. It walks the whole IFD
// chain and checks every page (same size and sample type, strips or tiles inside the
// file) before it returns, so that a damaged stack fails here and not halfway through
// a long run. Errors name the file.
func Open(path string) (*Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	r, err := newReader(f, false, nil)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	r.f, r.name = f, path
	return r, nil
}

// newReader parses the file behind f. With firstOnly it reads only the first image page
// (a slice of a folder) and reports an error if the file has more. dec supplies the
// scratch buffers (nil: the Reader's own).
func newReader(f *os.File, firstOnly bool, dec *decoder) (*Reader, error) {
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("not a regular file")
	}
	return parse(f, st.Size(), firstOnly, dec)
}

// parse reads the header and IFD chain of the size bytes behind ra.
func parse(ra io.ReaderAt, size int64, firstOnly bool, dec *decoder) (*Reader, error) {
	tf := &tiffFile{ra: ra, size: size}
	if err := tf.readHeader(); err != nil {
		return nil, err
	}
	r := &Reader{tf: tf}
	if dec == nil {
		dec = &r.dec
	}
	r.info.BigTIFF, r.info.ByteOrder = tf.big, tf.order
	maxIFDs := tf.size/tf.minIFDBytes() + 1
	seen := make(map[uint64]int)
	for off, i := tf.first, 0; off != 0; i++ {
		if int64(i) >= maxIFDs {
			return nil, FormatError(fmt.Sprintf("more IFDs than a file of %d bytes can hold", tf.size))
		}
		if j, ok := seen[off]; ok {
			return nil, FormatError(fmt.Sprintf("IFD chain loops: IFD %d points back to offset %d (IFD %d)", i-1, off, j))
		}
		seen[off] = i
		p, err := tf.parseIFD(off, len(r.pages) == 0)
		if err != nil {
			return nil, within(fmt.Sprintf("page %d", len(r.pages)), err)
		}
		off = p.next
		if p.reduced {
			r.info.Skipped++
			continue
		}
		if len(r.pages) > 0 {
			if q := r.pages[0]; p.width != q.width || p.height != q.height || p.typ != q.typ {
				return nil, FormatError(fmt.Sprintf("page %d is %d×%d %s, page 0 is %d×%d %s: every page of a stack must have the same size and sample type",
					len(r.pages), p.width, p.height, p.typ, q.width, q.height, q.typ))
			}
		}
		r.pages = append(r.pages, p)
		r.info.add(p)
		if firstOnly {
			if off != 0 {
				return nil, FormatError("more than one page in a file of a slice folder (read a multi-page file as a stack of its own)")
			}
			break
		}
	}
	if len(r.pages) == 0 {
		return nil, FormatError("no image pages")
	}
	// Check every strip and tile against the file before any slice is read.
	for i, p := range r.pages {
		if err := dec.checkChunks(tf, p); err != nil {
			return nil, within(fmt.Sprintf("page %d", i), err)
		}
	}
	p0 := r.pages[0]
	if ij, ok := parseImageJ(p0.desc); ok {
		if ij.channels > 1 || ij.frames > 1 {
			return nil, UnsupportedError(fmt.Sprintf("ImageJ hyperstack with %d channels and %d frames; tripass reads one channel at one time point (split it first)", max(ij.channels, 1), max(ij.frames, 1)))
		}
		if ij.images > len(r.pages) && !firstOnly {
			return nil, UnsupportedError(fmt.Sprintf("ImageJ file of %d images in %d pages (the images past the first page stored as raw data); save it as TIFF pages or BigTIFF", ij.images, len(r.pages)))
		}
	}
	if ome, ok := parseOME(p0.desc); ok {
		if ome.images > 1 {
			return nil, UnsupportedError(fmt.Sprintf("OME-TIFF with %d images (series); tripass reads one z-stack per file", ome.images))
		}
		if ome.sizeC > 1 || ome.sizeT > 1 {
			return nil, UnsupportedError(fmt.Sprintf("OME-TIFF with %d channels and %d time points; tripass reads one channel at one time point (split it first)", max(ome.sizeC, 1), max(ome.sizeT, 1)))
		}
	}
	r.hdr = volume.Header{NX: p0.width, NY: p0.height, NZ: len(r.pages), Type: p0.typ}
	r.hdr.Spacing, r.hdr.Unit = spacingOf(p0)
	if err := r.hdr.Validate(); err != nil {
		return nil, FormatError(err.Error())
	}
	r.info.Pages = len(r.pages)
	r.info.Tiled, r.info.RowsPerStrip, r.info.TileWidth, r.info.TileLength = p0.tiled, p0.rowsPerStrip, p0.tileW, p0.tileH
	return r, nil
}

// Header returns the volume's size, sample type and spacing.
func (r *Reader) Header() volume.Header { return r.hdr }

// Info returns how the stack is stored.
func (r *Reader) Info() Info { return r.info }

// ReadSlice reads the next page into dst (resized to the page) and returns io.EOF after
// the last one.
func (r *Reader) ReadSlice(dst *volume.Slice) error {
	if r.z >= len(r.pages) {
		return io.EOF
	}
	dst.Reset(r.hdr.NX, r.hdr.NY, r.hdr.Type)
	if err := r.dec.decodePage(r.tf, r.pages[r.z], dst.Data); err != nil {
		return fmt.Errorf("%s: %w", r.name, within(fmt.Sprintf("page %d", r.z), err))
	}
	r.z++
	return nil
}

// SeekSlice makes the next ReadSlice read slice z (0 ≤ z ≤ NZ; z = NZ reads io.EOF).
func (r *Reader) SeekSlice(z int) error {
	if z < 0 || z > len(r.pages) {
		return fmt.Errorf("%s: seek to slice %d of a stack of %d", r.name, z, len(r.pages))
	}
	r.z = z
	return nil
}

// Close closes the file.
func (r *Reader) Close() error { return r.f.Close() }

// Our own ImageDescription on page 0 records what TIFF tags cannot: the z spacing and
// the unit. It is one line, "tripass spacing=X,Y,Z unit=U", the unit left out when the
// spacing is in voxels.
const descPrefix = "tripass"

func description(h volume.Header) string {
	s := descPrefix
	if h.Spacing != ([3]float64{}) {
		s += " spacing=" + formatFloat(h.Spacing[0]) + "," + formatFloat(h.Spacing[1]) + "," + formatFloat(h.Spacing[2])
		if h.Unit != "" {
			s += " unit=" + h.Unit
		}
	}
	return s
}

func formatFloat(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

// parseDescription reads back what description wrote; ok is false for any other text.
func parseDescription(s string) (sp [3]float64, unit string, ok bool) {
	fields := strings.Fields(s)
	if len(fields) == 0 || fields[0] != descPrefix {
		return sp, "", false
	}
	for _, f := range fields[1:] {
		k, v, _ := strings.Cut(f, "=")
		switch k {
		case "spacing":
			parts := strings.Split(v, ",")
			if len(parts) != 3 {
				return sp, "", false
			}
			for i, p := range parts {
				x, err := strconv.ParseFloat(p, 64)
				if err != nil || !(x >= 0) || x > 1e300 {
					return sp, "", false
				}
				sp[i] = x
			}
		case "unit":
			u, err := volume.CanonicalUnit(v)
			if err != nil {
				return sp, "", false
			}
			unit = u
		}
	}
	return sp, unit, true
}

// imageJMeta is what tripass takes from the ImageDescription that ImageJ (and tifffile
// in its ImageJ mode) writes on page 0: lines of key=value after a first line
// "ImageJ=<version>". The keys used here, from memory of files in the wild: unit (the
// length unit of the spacing; "micron" or an escaped "\u00B5m" for micrometres),
// spacing (the z spacing in that unit), channels and frames (more than one of either
// interleaves other images with the z-slices), images (the number of images; files
// past 4 GiB store more images than pages, the rest as raw data after the first).
// Such files give XResolution in pixels per that unit with ResolutionUnit 1 (none).
type imageJMeta struct {
	unit             string // canonical; "" when absent or not a length
	zSpacing         float64
	channels, frames int
	images           int // number of images the file holds
}

func parseImageJ(desc string) (imageJMeta, bool) {
	var m imageJMeta
	if !strings.HasPrefix(desc, "ImageJ=") {
		return m, false
	}
	for _, line := range strings.Split(desc, "\n") {
		k, v, ok := strings.Cut(strings.TrimSpace(line), "=")
		if !ok {
			continue
		}
		switch k {
		case "unit":
			v = strings.ReplaceAll(v, `\u00B5`, "µ")
			if u, err := volume.CanonicalUnit(v); err == nil {
				m.unit = u
			}
		case "spacing":
			if x, err := strconv.ParseFloat(v, 64); err == nil && x > 0 && x < 1e300 {
				m.zSpacing = x
			}
		case "channels":
			m.channels, _ = strconv.Atoi(v)
		case "frames":
			m.frames, _ = strconv.Atoi(v)
		case "images":
			m.images, _ = strconv.Atoi(v)
		}
	}
	return m, true
}

// omeMeta is what tripass takes from OME-XML in the ImageDescription of an OME-TIFF
// (Open Microscopy Environment data model, schema 2016-06): the attributes of the first
// Pixels element. SizeC and SizeT above 1 mean channels or time points interleaved with
// the z-slices; PhysicalSizeX/Y/Z are the spacing, each in its own unit attribute
// (default µm); more than one Image element means several series in one file.
type omeMeta struct {
	spacing      [3]float64
	unit         string // canonical unit of spacing; "" when no physical size is given
	sizeC, sizeT int
	images       int
}

var omeAttr = regexp.MustCompile(`([A-Za-z]+)="([^"]*)"`)

func parseOME(desc string) (omeMeta, bool) {
	var m omeMeta
	if !strings.Contains(desc, "<OME") {
		return m, false
	}
	m.images = strings.Count(desc, "<Image ")
	i := strings.Index(desc, "<Pixels ")
	if i < 0 {
		return m, true
	}
	tag := desc[i:]
	if j := strings.IndexByte(tag, '>'); j >= 0 {
		tag = tag[:j]
	}
	attr := make(map[string]string)
	for _, kv := range omeAttr.FindAllStringSubmatch(tag, -1) {
		attr[kv[1]] = kv[2]
	}
	m.sizeC, _ = strconv.Atoi(attr["SizeC"])
	m.sizeT, _ = strconv.Atoi(attr["SizeT"])
	for i, axis := range []string{"X", "Y", "Z"} {
		v, err := strconv.ParseFloat(attr["PhysicalSize"+axis], 64)
		if err != nil || !(v > 0) || v > 1e300 {
			continue
		}
		u := attr["PhysicalSize"+axis+"Unit"]
		if u == "" {
			u = "µm" // the schema's default
		}
		cu, err := volume.CanonicalUnit(u)
		if err != nil || cu == "" {
			continue
		}
		if m.unit == "" {
			m.unit = cu
		}
		if v, err = volume.ConvertLength(v, cu, m.unit); err == nil {
			m.spacing[i] = v
		}
	}
	return m, true
}

// spacingOf derives the voxel spacing from page 0: x and y from XResolution and
// YResolution (pixels per ResolutionUnit; TIFF 6.0 Section 8: 2 inch, the default, 3
// centimetre), z and the unit from tripass's own description. The description's exact
// decimal values win when they agree with the resolution tags to 1e-6; tags that
// disagree (edited by another program) win over it. An ImageJ description supplies the
// unit and z spacing the same way, and the unit of resolution tags that have none;
// OME-XML's physical sizes, when given, are the spacing.
func spacingOf(p *page) ([3]float64, string) {
	dsp, dunit, dok := parseDescription(p.desc)
	if ij, ok := parseImageJ(p.desc); ok && ij.unit != "" {
		dsp, dunit, dok = [3]float64{0, 0, ij.zSpacing}, ij.unit, true
		if p.hasRes && p.xres > 0 && p.yres > 0 && p.resUnit == resUnitNone {
			return [3]float64{1 / p.xres, 1 / p.yres, ij.zSpacing}, ij.unit
		}
	}
	if ome, ok := parseOME(p.desc); ok && ome.unit != "" {
		return ome.spacing, ome.unit
	}
	var sp [3]float64
	unit := ""
	if p.hasRes && p.xres > 0 && p.yres > 0 && (p.resUnit == resUnitInch || p.resUnit == resUnitCenti) {
		perUnit := 25400.0 // micrometres per inch
		if p.resUnit == resUnitCenti {
			perUnit = 10000 // micrometres per centimetre
		}
		sp[0], sp[1], unit = perUnit/p.xres, perUnit/p.yres, "um"
		if dok && dunit != "" {
			x, err1 := volume.ConvertLength(sp[0], "um", dunit)
			y, err2 := volume.ConvertLength(sp[1], "um", dunit)
			if err1 == nil && err2 == nil {
				sp[0], sp[1], unit = x, y, dunit
				if close6(x, dsp[0]) && close6(y, dsp[1]) {
					sp[0], sp[1] = dsp[0], dsp[1]
				}
				sp[2] = dsp[2]
			}
		}
		return sp, unit
	}
	if dok {
		return dsp, dunit
	}
	return sp, ""
}

func close6(a, b float64) bool {
	d := a - b
	if d < 0 {
		d = -d
	}
	return d <= 1e-6*max(a, b, -a, -b)
}
