package tiffstack

import (
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/tripass/tripass/volume"
)

// A field is one IFD entry, located but not loaded: small values sit in the entry
// itself, larger ones at an offset that parseIFD has checked against the file size.
type field struct {
	typ    uint16
	count  uint64
	inline bool
	value  [8]byte // the entry's value bytes (file byte order) when inline
	offset uint64  // where the values start otherwise
}

// page is what tripass needs from one IFD.
type page struct {
	width, height int
	typ           volume.SampleType
	compression   uint16
	predictor     uint16
	tiled         bool
	rowsPerStrip  int // strips only
	tileW, tileH  int // tiles only
	n             int // number of strips or tiles
	offsets       field
	counts        field
	reduced       bool // NewSubfileType marks a reduced-resolution copy (thumbnail, pyramid level)
	next          uint64

	// Only read from the first page.
	desc       string
	xres, yres float64 // pixels per resolution unit; 0 when absent
	resUnit    uint16
	hasRes     bool
}

// chunkBytes is the decoded size of strip or tile i.
func (p *page) chunkBytes(i int) int {
	bs := p.typ.Size()
	if p.tiled {
		return p.tileW * p.tileH * bs
	}
	rows := min(p.rowsPerStrip, p.height-i*p.rowsPerStrip)
	return rows * p.width * bs
}

// tiffFile is an open TIFF or BigTIFF: its reader, size, byte order and flavour.
type tiffFile struct {
	ra      io.ReaderAt
	size    int64
	order   binary.ByteOrder
	big     bool
	first   uint64 // offset of the first IFD
	scratch []byte // reused for IFD entries and value arrays
}

// maxSmallTile is the largest tile tripass accepts for an image smaller than it: a
// crafted tile size could otherwise force a buffer far larger than the image (a tile
// of up to four slices is accepted whatever its size).
const maxSmallTile = 16 << 20

// maxDescription bounds how much of an ImageDescription is read: tripass's own line is
// short, OME-XML puts the Pixels element tripass needs near its start, and a
// description can be megabytes of XML.
const maxDescription = 64 << 10

// readAt reads len(b) bytes at off; a short read is io.ErrUnexpectedEOF.
func (t *tiffFile) readAt(b []byte, off uint64) error {
	if off > uint64(t.size) || uint64(len(b)) > uint64(t.size)-off {
		return FormatError(fmt.Sprintf("%d bytes at offset %d run past the end of the file (%d bytes)", len(b), off, t.size))
	}
	n, err := t.ra.ReadAt(b, int64(off))
	if n == len(b) {
		return nil
	}
	if err == nil || err == io.EOF {
		err = io.ErrUnexpectedEOF
	}
	return err
}

// readHeader reads the 8-byte TIFF or 16-byte BigTIFF header (TIFF 6.0 Section 2;
// BigTIFF: byte order, 43, offset size 8, 0, then an 8-byte first IFD offset).
func (t *tiffFile) readHeader() error {
	var b [16]byte
	n := min(int64(len(b)), t.size)
	if n < 8 {
		return fmt.Errorf("file of %d bytes is too short for a TIFF header: %w", t.size, io.ErrUnexpectedEOF)
	}
	if err := t.readAt(b[:n], 0); err != nil {
		return err
	}
	switch string(b[:2]) {
	case "II":
		t.order = binary.LittleEndian
	case "MM":
		t.order = binary.BigEndian
	default:
		return FormatError("not a TIFF file (no II or MM byte-order mark)")
	}
	switch t.order.Uint16(b[2:]) {
	case 42:
		t.first = uint64(t.order.Uint32(b[4:]))
	case 43:
		if n < 16 {
			return fmt.Errorf("BigTIFF header cut short: %w", io.ErrUnexpectedEOF)
		}
		if t.order.Uint16(b[4:]) != 8 || t.order.Uint16(b[6:]) != 0 {
			return FormatError("BigTIFF header with an offset size other than 8")
		}
		t.big = true
		t.first = t.order.Uint64(b[8:])
	default:
		return FormatError(fmt.Sprintf("not a TIFF file (version %d, want 42 or 43 for BigTIFF)", t.order.Uint16(b[2:])))
	}
	return nil
}

// minIFDBytes is the smallest IFD that can describe an image: a count, four entries
// (width, length, offsets, byte counts) and the next offset. It bounds the number of
// pages a file of a given size can hold, so a crafted chain cannot run on for ever.
func (t *tiffFile) minIFDBytes() int64 {
	if t.big {
		return 8 + 4*20 + 8
	}
	return 2 + 4*12 + 4
}

// buf returns the scratch buffer resized to n bytes.
func (t *tiffFile) buf(n int) []byte {
	if cap(t.scratch) < n {
		t.scratch = make([]byte, n)
	}
	return t.scratch[:n]
}

// parseIFD reads the IFD at off into a page and checks it: supported layout, sample
// type and compression; a slice size within volume's bounds; strip or tile counts that
// match the image size; every value array inside the file.
func (t *tiffFile) parseIFD(off uint64, first bool) (*page, error) {
	countSize, entrySize, nextSize := 2, 12, 4
	if t.big {
		countSize, entrySize, nextSize = 8, 20, 8
	}
	// TIFF 6.0 asks for IFDs on word boundaries; libtiff reads unaligned ones, and so
	// do we.
	cb := t.buf(countSize)
	if err := t.readAt(cb, off); err != nil {
		return nil, within(fmt.Sprintf("IFD at offset %d", off), err)
	}
	var n uint64
	if t.big {
		n = t.order.Uint64(cb)
	} else {
		n = uint64(t.order.Uint16(cb))
	}
	if n == 0 {
		return nil, FormatError(fmt.Sprintf("IFD at offset %d has no entries", off))
	}
	rest := uint64(t.size) - off - uint64(countSize)
	if n > rest/uint64(entrySize) || n*uint64(entrySize)+uint64(nextSize) > rest {
		return nil, FormatError(fmt.Sprintf("IFD at offset %d claims %d entries, more than the file holds", off, n))
	}
	if n > 1<<16 {
		// Tags are 16-bit and unique within an IFD (TIFF 6.0 Section 2), so more
		// entries than that can only be damage; do not size a buffer from it.
		return nil, FormatError(fmt.Sprintf("IFD at offset %d claims %d entries, more than the 65536 distinct tags", off, n))
	}
	b := t.buf(int(n)*entrySize + nextSize)
	if err := t.readAt(b, off+uint64(countSize)); err != nil {
		return nil, within(fmt.Sprintf("IFD at offset %d", off), err)
	}
	p := &page{compression: cNone, predictor: predNone, resUnit: resUnitInch}
	var (
		bps          uint64 = 1 // TIFF 6.0 default
		sampleFormat uint64 = 1
		spp          uint64 = 1
		photometric  uint64 = 1
		haveW, haveH bool
		rps          uint64 = math.MaxUint32 // default: one strip
		stripOffs    *field
		stripCounts  *field
		tileOffs     *field
		tileCounts   *field
		tileW, tileH uint64
		descField    *field
		xres, yres   *field
	)
	// Copy the entries out of the scratch buffer before reading any values (which
	// reuses it).
	type entry struct {
		tag uint16
		f   field
	}
	entries := make([]entry, 0, min(n, 64))
	for i := uint64(0); i < n; i++ {
		e := b[i*uint64(entrySize):]
		tag, typ := t.order.Uint16(e), t.order.Uint16(e[2:])
		var cnt uint64
		var val []byte
		if t.big {
			cnt, val = t.order.Uint64(e[4:]), e[12:20]
		} else {
			cnt, val = uint64(t.order.Uint32(e[4:])), e[8:12]
		}
		sz := sizeOfType(typ)
		if sz == 0 {
			continue // TIFF 6.0: readers skip fields of unknown type
		}
		switch tag {
		case tNewSubfileType, tImageWidth, tImageLength, tBitsPerSample, tCompression,
			tPhotometric, tImageDesc, tStripOffsets, tSamplesPerPixel, tRowsPerStrip,
			tStripByteCounts, tXResolution, tYResolution, tPlanarConfig, tResolutionUnit,
			tPredictor, tTileWidth, tTileLength, tTileOffsets, tTileByteCounts, tSampleFormat:
		default:
			continue // not ours: do not even check where its values are
		}
		f := field{typ: typ, count: cnt}
		if cnt > uint64(t.size)/uint64(sz) {
			return nil, FormatError(fmt.Sprintf("tag %d claims %d values, more than the file holds", tag, cnt))
		}
		total := cnt * uint64(sz)
		if total <= uint64(len(val)) {
			f.inline = true
			copy(f.value[:], val)
		} else {
			if t.big {
				f.offset = t.order.Uint64(val)
			} else {
				f.offset = uint64(t.order.Uint32(val))
			}
			if f.offset > uint64(t.size) || total > uint64(t.size)-f.offset {
				return nil, FormatError(fmt.Sprintf("tag %d: %d values at offset %d run past the end of the file (%d bytes)", tag, cnt, f.offset, t.size))
			}
		}
		entries = append(entries, entry{tag, f})
	}
	if t.big {
		p.next = t.order.Uint64(b[n*uint64(entrySize):])
	} else {
		p.next = uint64(t.order.Uint32(b[n*uint64(entrySize):]))
	}
	for i := range entries {
		e := &entries[i]
		f := &e.f
		if e.tag == tStripOffsets || e.tag == tStripByteCounts || e.tag == tTileOffsets || e.tag == tTileByteCounts {
			switch f.typ {
			case dtShort, dtLong, dtLong8, dtIFD, dtIFD8:
			default:
				return nil, FormatError(fmt.Sprintf("tag %d has field type %d, want an unsigned integer type", e.tag, f.typ))
			}
			switch e.tag {
			case tStripOffsets:
				stripOffs = f
			case tStripByteCounts:
				stripCounts = f
			case tTileOffsets:
				tileOffs = f
			case tTileByteCounts:
				tileCounts = f
			}
			continue
		}
		switch e.tag {
		case tImageDesc:
			descField = f
			continue
		case tXResolution:
			xres = f
			continue
		case tYResolution:
			yres = f
			continue
		}
		if f.count == 0 {
			continue
		}
		v, err := t.firstUint(f)
		if err != nil {
			return nil, within(fmt.Sprintf("tag %d", e.tag), err)
		}
		switch e.tag {
		case tNewSubfileType:
			p.reduced = v&1 != 0
		case tImageWidth:
			if v == 0 || v > math.MaxUint32 {
				return nil, FormatError(fmt.Sprintf("image width %d", v))
			}
			p.width, haveW = int(v), true
		case tImageLength:
			if v == 0 || v > math.MaxUint32 {
				return nil, FormatError(fmt.Sprintf("image length %d", v))
			}
			p.height, haveH = int(v), true
		case tBitsPerSample:
			bps = v
		case tCompression:
			p.compression = uint16(v)
			if v > math.MaxUint16 {
				p.compression = 0
			}
		case tPhotometric:
			photometric = v
		case tSamplesPerPixel:
			spp = v
		case tRowsPerStrip:
			rps = v
		case tPlanarConfig:
			// With one sample per pixel both planar configurations store the same bytes.
		case tResolutionUnit:
			p.resUnit = uint16(v)
		case tPredictor:
			p.predictor = uint16(v)
		case tTileWidth:
			tileW = v
		case tTileLength:
			tileH = v
		case tSampleFormat:
			sampleFormat = v
		}
	}
	if !haveW || !haveH {
		return nil, FormatError("IFD without ImageWidth or ImageLength")
	}
	if spp != 1 {
		return nil, UnsupportedError(fmt.Sprintf("%d samples per pixel (RGB or multi-channel); tripass reads grey stacks with one sample per pixel", spp))
	}
	switch photometric {
	case 0, 1: // WhiteIsZero, BlackIsZero: grey values as stored
	case 2:
		return nil, UnsupportedError("RGB photometric interpretation; tripass reads grey stacks")
	case 3:
		return nil, UnsupportedError("palette colour images; tripass reads grey stacks")
	default:
		return nil, UnsupportedError(fmt.Sprintf("photometric interpretation %d; tripass reads grey stacks", photometric))
	}
	typ, err := sampleType(bps, sampleFormat)
	if err != nil {
		return nil, err
	}
	p.typ = typ
	// Check the slice size before anything is sized from it.
	if err := (volume.Header{NX: p.width, NY: p.height, NZ: 1, Type: typ}).Validate(); err != nil {
		return nil, FormatError(err.Error())
	}
	switch p.compression {
	case cNone, cLZW, cDeflate, cDeflateOld, cPackBits:
	default:
		return nil, UnsupportedError(fmt.Sprintf("compression %s (%d); tripass reads none, LZW, Deflate and PackBits", compressionName(p.compression), p.compression))
	}
	switch p.predictor {
	case predNone:
	case predHoriz:
	case predFloat:
		if !typ.IsFloat() {
			return nil, FormatError(fmt.Sprintf("floating-point predictor on %s samples", typ))
		}
	default:
		return nil, UnsupportedError(fmt.Sprintf("predictor %d", p.predictor))
	}
	if p.compression != cLZW && p.compression != cDeflate && p.compression != cDeflateOld {
		// libtiff applies a predictor only inside the LZW and Deflate codecs and
		// ignores the tag elsewhere; so do we.
		p.predictor = predNone
	}
	var offs, cnts *field
	want := uint64(0)
	if tileOffs != nil || tileW != 0 || tileH != 0 {
		// Tiles (TIFF 6.0 Section 15). The tile size bounds the scratch buffer: refuse
		// tiles much larger than the image so that a crafted size cannot force a huge one.
		if tileW == 0 || tileH == 0 || tileOffs == nil || tileCounts == nil {
			return nil, FormatError("tiled image without TileWidth, TileLength, TileOffsets and TileByteCounts")
		}
		sliceBytes := uint64(p.width) * uint64(p.height) * uint64(typ.Size())
		if tileW > 1<<16 || tileH > 1<<16 || tileW*tileH*uint64(typ.Size()) > max(maxSmallTile, 4*sliceBytes) {
			return nil, FormatError(fmt.Sprintf("tiles of %d×%d for a %d×%d image", tileW, tileH, p.width, p.height))
		}
		p.tiled = true
		p.tileW, p.tileH = int(tileW), int(tileH)
		want = (uint64(p.width) + tileW - 1) / tileW * ((uint64(p.height) + tileH - 1) / tileH)
		offs, cnts = tileOffs, tileCounts
	} else {
		if stripOffs == nil || stripCounts == nil {
			return nil, FormatError("image without StripOffsets or StripByteCounts")
		}
		if rps == 0 {
			return nil, FormatError("RowsPerStrip is 0")
		}
		rps = min(rps, uint64(p.height))
		p.rowsPerStrip = int(rps)
		want = (uint64(p.height) + rps - 1) / rps
		offs, cnts = stripOffs, stripCounts
	}
	what := "strip"
	if p.tiled {
		what = "tile"
	}
	if offs.count != want || cnts.count != want {
		return nil, FormatError(fmt.Sprintf("%d %s offsets and %d byte counts, want %d for a %d×%d image", offs.count, what, cnts.count, want, p.width, p.height))
	}
	p.n, p.offsets, p.counts = int(want), *offs, *cnts
	if first {
		if descField != nil && (descField.typ == dtASCII || descField.typ == dtByte || descField.typ == dtUndefined) {
			n := min(descField.count, maxDescription)
			db := make([]byte, n)
			if err := t.fieldBytes(descField, db); err != nil {
				return nil, within("ImageDescription", err)
			}
			p.desc = strings.TrimRight(string(db), "\x00")
		}
		if xres != nil && yres != nil {
			x, err1 := t.rational(xres)
			y, err2 := t.rational(yres)
			if err := errors.Join(err1, err2); err != nil {
				return nil, within("resolution", err)
			}
			p.xres, p.yres, p.hasRes = x, y, true
		}
	}
	return p, nil
}

// sampleType maps BitsPerSample and SampleFormat (TIFF 6.0 Section 19: 1 unsigned
// integer, 2 two's complement signed integer, 3 IEEE floating point, 4 undefined, read
// as unsigned) to a volume sample type.
func sampleType(bps, format uint64) (volume.SampleType, error) {
	switch {
	case format == 1 || format == 4:
		switch bps {
		case 8:
			return volume.Uint8, nil
		case 16:
			return volume.Uint16, nil
		case 32:
			return volume.Uint32, nil
		}
	case format == 2:
		switch bps {
		case 16:
			return volume.Int16, nil
		case 32:
			return volume.Int32, nil
		}
	case format == 3:
		switch bps {
		case 32:
			return volume.Float32, nil
		case 64:
			return volume.Float64, nil
		}
	default:
		return volume.Invalid, UnsupportedError(fmt.Sprintf("SampleFormat %d", format))
	}
	kind := [...]string{1: "unsigned", 2: "signed", 3: "floating-point", 4: "unsigned"}[format]
	return volume.Invalid, UnsupportedError(fmt.Sprintf("%d-bit %s samples (tripass reads uint8, uint16, int16, uint32, int32, float32, float64)", bps, kind))
}

// fieldBytes reads the first len(dst) bytes of f's values.
func (t *tiffFile) fieldBytes(f *field, dst []byte) error {
	if f.inline {
		copy(dst, f.value[:])
		return nil
	}
	return t.readAt(dst, f.offset)
}

// firstUint returns the first value of an integer field.
func (t *tiffFile) firstUint(f *field) (uint64, error) {
	b := f.value[:] // inline values need no read (and no allocation)
	if !f.inline {
		b = make([]byte, 8)
		if err := t.readAt(b[:sizeOfType(f.typ)], f.offset); err != nil {
			return 0, err
		}
	}
	switch f.typ {
	case dtByte, dtUndefined:
		return uint64(b[0]), nil
	case dtShort:
		return uint64(t.order.Uint16(b)), nil
	case dtLong, dtIFD:
		return uint64(t.order.Uint32(b)), nil
	case dtLong8, dtIFD8:
		return t.order.Uint64(b), nil
	}
	return 0, FormatError(fmt.Sprintf("field type %d where an unsigned integer is expected", f.typ))
}

// rational returns the first value of a RATIONAL field (or a FLOAT/DOUBLE written by a
// lenient writer) as a float64; 0 when the denominator is 0.
func (t *tiffFile) rational(f *field) (float64, error) {
	if f.count == 0 {
		return 0, nil
	}
	var b [8]byte
	sz := sizeOfType(f.typ)
	if err := t.fieldBytes(f, b[:sz]); err != nil {
		return 0, err
	}
	switch f.typ {
	case dtRational:
		num, den := t.order.Uint32(b[:]), t.order.Uint32(b[4:])
		if den == 0 {
			return 0, nil
		}
		return float64(num) / float64(den), nil
	case dtFloat:
		return float64(math.Float32frombits(t.order.Uint32(b[:]))), nil
	case dtDouble:
		return math.Float64frombits(t.order.Uint64(b[:])), nil
	case dtShort, dtLong:
		v, err := t.firstUint(f)
		return float64(v), err
	}
	return 0, nil
}

// uints loads every value of an unsigned integer field into dst (reused), reading in
// bounded chunks. The count was checked against the file size by parseIFD.
func (t *tiffFile) uints(f *field, dst []uint64) ([]uint64, error) {
	n := int(f.count)
	if cap(dst) < n {
		dst = make([]uint64, n)
	}
	dst = dst[:n]
	sz := sizeOfType(f.typ)
	if f.inline {
		for i := range dst {
			dst[i] = t.decodeUint(f.typ, f.value[i*sz:])
		}
		return dst, nil
	}
	const chunk = 1 << 16 // bytes read per call
	per := chunk / sz
	for i := 0; i < n; i += per {
		m := min(per, n-i)
		b := t.buf(m * sz)
		if err := t.readAt(b, f.offset+uint64(i*sz)); err != nil {
			return nil, err
		}
		for j := 0; j < m; j++ {
			dst[i+j] = t.decodeUint(f.typ, b[j*sz:])
		}
	}
	return dst, nil
}

func (t *tiffFile) decodeUint(typ uint16, b []byte) uint64 {
	switch typ {
	case dtShort:
		return uint64(t.order.Uint16(b))
	case dtLong, dtIFD:
		return uint64(t.order.Uint32(b))
	default: // dtLong8, dtIFD8: parseIFD admits nothing else for offsets and counts
		return t.order.Uint64(b)
	}
}
