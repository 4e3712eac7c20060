package tiffstack

import (
	"bufio"
	"compress/zlib"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"runtime"
	"sync"
	"sync/atomic"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// Compression is the compression scheme of the strips tripass writes.
type Compression int

// The compressions tripass writes.
const (
	None    Compression = iota // uncompressed (TIFF code 1)
	LZW                        // LZW (TIFF 6.0 Section 13, code 5)
	Deflate                    // zlib/Deflate (code 8, Adobe's Deflate tag value)
)

// String returns "none", "LZW" or "Deflate".
func (c Compression) String() string {
	switch c {
	case None:
		return "none"
	case LZW:
		return "LZW"
	case Deflate:
		return "Deflate"
	}
	return fmt.Sprintf("Compression(%d)", int(c))
}

func (c Compression) code() uint16 {
	return [...]uint16{None: cNone, LZW: cLZW, Deflate: cDeflate}[c]
}

// WriteOptions choose how Create and CreateFolder write.
type WriteOptions struct {
	Compression Compression
	// Predictor applies a predictor before compression, which makes smooth images
	// compress much better: horizontal differencing (TIFF 6.0 Section 14) for integer
	// samples, the floating-point predictor of Adobe Photoshop TIFF Technical Note 3 for
	// float32 and float64. It needs LZW or Deflate.
	Predictor bool
	// BigTIFF forces the BigTIFF format. Without it Create picks BigTIFF only when the
	// file could pass 4 GiB.
	BigTIFF bool
	// Overwrite allows replacing an existing output.
	Overwrite bool
}

// stripTarget is the uncompressed size tripass aims at for one strip: large enough for
// few, long reads; small enough that strips compress in parallel and a reader of one
// strip does not hold much (the TIFF 6.0 guideline of about 8 KiB dates from 1992).
const stripTarget = 256 << 10

// pageEncoder turns slices into TIFF pages: the strip layout, the predictor, the
// compressors of its workers and the IFD of each page.
type pageEncoder struct {
	h            volume.Header
	opt          WriteOptions
	big          bool
	rowsPerStrip int
	nstrips      int
	strips       [][]byte // the encoded strips of the current slice
	bufs         [][]byte // buffers the encoded strips live in, reused
	workers      []*stripWorker
	ifd          []byte // the IFD and its values, reused
	res          [2][2]uint32
	hasRes       bool
}

type stripWorker struct {
	lzw     *lzwEncoder
	zw      *zlib.Writer
	aw      appendWriter
	scratch []byte
}

type appendWriter struct{ b []byte }

func (w *appendWriter) Write(p []byte) (int, error) {
	w.b = append(w.b, p...)
	return len(p), nil
}

func newPageEncoder(h volume.Header, opt WriteOptions) (*pageEncoder, error) {
	if err := h.Validate(); err != nil {
		return nil, err
	}
	if opt.Compression < None || opt.Compression > Deflate {
		return nil, fmt.Errorf("unknown compression %v", opt.Compression)
	}
	if opt.Predictor && opt.Compression == None {
		return nil, errors.New("a predictor needs LZW or Deflate compression")
	}
	rowBytes := h.NX * h.Type.Size()
	rps := min(max(1, stripTarget/rowBytes), h.NY)
	e := &pageEncoder{h: h, opt: opt, rowsPerStrip: rps, nstrips: (h.NY + rps - 1) / rps}
	e.strips = make([][]byte, e.nstrips)
	e.bufs = make([][]byte, e.nstrips)
	if h.Unit != "" && h.Spacing[0] > 0 && h.Spacing[1] > 0 {
		// Resolution in pixels per centimetre (ResolutionUnit 3).
		x, err1 := volume.ConvertLength(h.Spacing[0], h.Unit, "cm")
		y, err2 := volume.ConvertLength(h.Spacing[1], h.Unit, "cm")
		if err1 == nil && err2 == nil {
			xn, xd := toRational(1 / x)
			yn, yd := toRational(1 / y)
			if xn != 0 && yn != 0 {
				e.res, e.hasRes = [2][2]uint32{{xn, xd}, {yn, yd}}, true
			}
		}
	}
	return e, nil
}

// toRational returns the best approximation num/den of x with both terms below 2^32,
// by continued fractions; 0/1 for values it cannot represent.
func toRational(x float64) (num, den uint32) {
	if !(x > 0) || x >= math.MaxUint32 {
		return 0, 1
	}
	h0, h1, k0, k1 := uint64(0), uint64(1), uint64(1), uint64(0)
	y := x
	for i := 0; i < 64; i++ {
		a := math.Floor(y)
		if a > math.MaxUint32 {
			break
		}
		h2, k2 := uint64(a)*h1+h0, uint64(a)*k1+k0
		if h2 > math.MaxUint32 || k2 > math.MaxUint32 {
			break
		}
		h0, h1, k0, k1 = h1, h2, k1, k2
		if float64(h1)/float64(k1) == x || y-a < 1e-12 {
			break
		}
		y = 1 / (y - a)
	}
	if k1 == 0 {
		return 0, 1
	}
	return uint32(h1), uint32(k1)
}

// pageBound is an upper bound of the bytes one page can take, compressed or not.
func (e *pageEncoder) pageBound() uint64 {
	var data uint64
	for i := 0; i < e.nstrips; i++ {
		n := uint64(e.stripBytes(i))
		switch e.opt.Compression {
		case None:
			data += n
		case LZW:
			// At most one 12-bit code per input byte, plus Clear codes every 3836
			// codes and the first Clear, last code and EndOfInformation.
			data += n*3/2 + n/1024 + 16
		case Deflate:
			// Incompressible data goes into stored blocks of up to 64 KiB with 5 bytes
			// of framing each, plus the zlib header and checksum (RFC 1950/1951).
			data += n + n/1024 + 64
		}
	}
	const ifdMax = 8 + 20*20 + 8 + 64 // a BigTIFF IFD of up to 20 entries and our small values
	return data + ifdMax + 16*uint64(e.nstrips) + uint64(len(description(e.h))) + 8
}

func (e *pageEncoder) stripBytes(i int) int {
	rows := min(e.rowsPerStrip, e.h.NY-i*e.rowsPerStrip)
	return rows * e.h.NX * e.h.Type.Size()
}

// encode fills e.strips with the strips of s: views of s itself when uncompressed,
// otherwise compressed by GOMAXPROCS workers. s is not modified.
func (e *pageEncoder) encode(s *volume.Slice) {
	rowBytes := e.h.NX * e.h.Type.Size()
	if e.opt.Compression == None {
		for i := range e.strips {
			lo := i * e.rowsPerStrip * rowBytes
			e.strips[i] = s.Data[lo : lo+e.stripBytes(i)]
		}
		return
	}
	nw := min(runtime.GOMAXPROCS(0), e.nstrips)
	if len(s.Data) < 2*stripTarget {
		nw = 1 // not worth the goroutines
	}
	for len(e.workers) < nw {
		e.workers = append(e.workers, &stripWorker{})
	}
	if nw == 1 {
		for i := range e.strips {
			e.encodeStrip(e.workers[0], i, s)
		}
		return
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	for _, w := range e.workers[:nw] {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := int(next.Add(1)) - 1; i < e.nstrips; i = int(next.Add(1)) - 1 {
				e.encodeStrip(w, i, s)
			}
		}()
	}
	wg.Wait()
}

func (e *pageEncoder) encodeStrip(w *stripWorker, i int, s *volume.Slice) {
	bs := e.h.Type.Size()
	rowBytes := e.h.NX * bs
	lo := i * e.rowsPerStrip * rowBytes
	data := s.Data[lo : lo+e.stripBytes(i)]
	if e.opt.Predictor {
		w.scratch = grow(w.scratch, len(data))
		if e.h.Type.IsFloat() {
			for r := 0; r < len(data); r += rowBytes {
				floatPredict(w.scratch[r:r+rowBytes], data[r:r+rowBytes], bs)
			}
		} else {
			copy(w.scratch, data)
			for r := 0; r < len(data); r += rowBytes {
				horizontalPredict(w.scratch[r:r+rowBytes], bs)
			}
		}
		data = w.scratch
	}
	switch e.opt.Compression {
	case LZW:
		if w.lzw == nil {
			w.lzw = new(lzwEncoder)
		}
		e.bufs[i] = w.lzw.encode(e.bufs[i][:0], data)
	case Deflate:
		w.aw.b = e.bufs[i][:0]
		if w.zw == nil {
			w.zw = zlib.NewWriter(&w.aw)
		} else {
			w.zw.Reset(&w.aw)
		}
		w.zw.Write(data) // writes to memory cannot fail
		w.zw.Close()
		e.bufs[i], w.aw.b = w.aw.b, nil
	}
	e.strips[i] = e.bufs[i]
}

// horizontalPredict replaces each little-endian sample of a row by its difference from
// the one before (TIFF 6.0 Section 14), modulo 2^(8·bs).
func horizontalPredict(row []byte, bs int) {
	le := binary.LittleEndian
	switch bs {
	case 1:
		for i := len(row) - 1; i > 0; i-- {
			row[i] -= row[i-1]
		}
	case 2:
		for i := len(row) - 2; i > 0; i -= 2 {
			le.PutUint16(row[i:], le.Uint16(row[i:])-le.Uint16(row[i-2:]))
		}
	case 4:
		for i := len(row) - 4; i > 0; i -= 4 {
			le.PutUint32(row[i:], le.Uint32(row[i:])-le.Uint32(row[i-4:]))
		}
	case 8:
		for i := len(row) - 8; i > 0; i -= 8 {
			le.PutUint64(row[i:], le.Uint64(row[i:])-le.Uint64(row[i-8:]))
		}
	}
}

// floatPredict writes into dst the floating-point predictor's form of a row of
// little-endian samples (Adobe Photoshop TIFF Technical Note 3): byte planes, most
// significant first, then each byte minus the one before it.
func floatPredict(dst, row []byte, bs int) {
	n := len(row) / bs
	for b := 0; b < bs; b++ {
		plane := dst[(bs-1-b)*n : (bs-b)*n]
		for s := range plane {
			plane[s] = row[s*bs+b]
		}
	}
	for i := len(dst) - 1; i > 0; i-- {
		dst[i] -= dst[i-1]
	}
}

// An ifdEntry is one field of an IFD being written, its values little-endian.
type ifdEntry struct {
	tag, typ uint16
	count    int
	data     []byte
}

func shortEntry(tag uint16, v uint16) ifdEntry {
	return ifdEntry{tag, dtShort, 1, binary.LittleEndian.AppendUint16(nil, v)}
}

func longEntry(tag uint16, v uint32) ifdEntry {
	return ifdEntry{tag, dtLong, 1, binary.LittleEndian.AppendUint32(nil, v)}
}

// writeHeader writes the TIFF or BigTIFF header, with the first IFD right after it,
// and returns the offset of that IFD.
func writeHeader(w io.Writer, big bool) (uint64, error) {
	if big {
		var b [16]byte
		copy(b[:], "II")
		binary.LittleEndian.PutUint16(b[2:], 43)
		binary.LittleEndian.PutUint16(b[4:], 8)
		binary.LittleEndian.PutUint64(b[8:], 16)
		_, err := w.Write(b[:])
		return 16, err
	}
	var b [8]byte
	copy(b[:], "II")
	binary.LittleEndian.PutUint16(b[2:], 42)
	binary.LittleEndian.PutUint32(b[4:], 8)
	_, err := w.Write(b[:])
	return 8, err
}

// writePage writes the IFD of the encoded slice at offset off, its values, then its
// strips, and returns the offset where the next page will start. Putting each IFD
// before its data lets the whole file be written in one pass: when the IFD is written
// the compressed sizes are known, and so is where the next IFD will go. desc, if not
// empty, is written as the ImageDescription.
func (e *pageEncoder) writePage(w io.Writer, off uint64, desc string, last bool) (uint64, error) {
	h := e.h
	bits := uint16(8 * h.Type.Size())
	format := uint16(1) // unsigned integer
	switch {
	case h.Type.IsFloat():
		format = 3
	case h.Type.IsSigned():
		format = 2
	}
	offType, offSize := uint16(dtLong), 4
	if e.big {
		offType, offSize = dtLong8, 8
	}
	entries := make([]ifdEntry, 0, 20)
	entries = append(entries,
		longEntry(tImageWidth, uint32(h.NX)),
		longEntry(tImageLength, uint32(h.NY)),
		shortEntry(tBitsPerSample, bits),
		shortEntry(tCompression, e.opt.Compression.code()),
		shortEntry(tPhotometric, 1), // BlackIsZero
	)
	if desc != "" {
		entries = append(entries, ifdEntry{tImageDesc, dtASCII, len(desc) + 1, append([]byte(desc), 0)})
	}
	stripOffsets := len(entries)
	entries = append(entries,
		ifdEntry{tStripOffsets, offType, e.nstrips, make([]byte, e.nstrips*offSize)},
		shortEntry(tSamplesPerPixel, 1),
		longEntry(tRowsPerStrip, uint32(e.rowsPerStrip)),
	)
	counts := make([]byte, 0, e.nstrips*offSize)
	var total uint64
	for _, s := range e.strips {
		if e.big {
			counts = binary.LittleEndian.AppendUint64(counts, uint64(len(s)))
		} else {
			counts = binary.LittleEndian.AppendUint32(counts, uint32(len(s)))
		}
		total += uint64(len(s))
	}
	entries = append(entries, ifdEntry{tStripByteCounts, offType, e.nstrips, counts})
	if e.hasRes {
		for i, tag := range []uint16{tXResolution, tYResolution} {
			b := binary.LittleEndian.AppendUint32(nil, e.res[i][0])
			entries = append(entries, ifdEntry{tag, dtRational, 1, binary.LittleEndian.AppendUint32(b, e.res[i][1])})
		}
	}
	entries = append(entries, shortEntry(tPlanarConfig, 1))
	if e.hasRes {
		entries = append(entries, shortEntry(tResolutionUnit, resUnitCenti))
	}
	if e.opt.Predictor {
		p := uint16(predHoriz)
		if h.Type.IsFloat() {
			p = predFloat
		}
		entries = append(entries, shortEntry(tPredictor, p))
	}
	entries = append(entries, shortEntry(tSampleFormat, format))

	// Lay out: the IFD, then the values too long for their entries, then the strips.
	countSize, entrySize, inline := 2, 12, 4
	if e.big {
		countSize, entrySize, inline = 8, 20, 8
	}
	ifdLen := uint64(countSize + len(entries)*entrySize + offSize)
	extra := ifdLen
	where := make([]uint64, len(entries))
	for i, en := range entries {
		if len(en.data) > inline {
			where[i] = off + extra
			extra += uint64(len(en.data))
			extra += extra & 1 // keep values on word boundaries
		}
	}
	dataStart := off + extra
	so := entries[stripOffsets].data
	pos := dataStart
	for i, s := range e.strips {
		if e.big {
			binary.LittleEndian.PutUint64(so[8*i:], pos)
		} else {
			binary.LittleEndian.PutUint32(so[4*i:], uint32(pos))
		}
		pos += uint64(len(s))
	}
	end := pos + pos&1
	if !e.big && end > math.MaxUint32 {
		return 0, errors.New("classic TIFF would pass 4 GiB (use BigTIFF)")
	}
	next := end
	if last {
		next = 0
	}
	le := binary.LittleEndian
	b := e.ifd[:0]
	if e.big {
		b = le.AppendUint64(b, uint64(len(entries)))
	} else {
		b = le.AppendUint16(b, uint16(len(entries)))
	}
	for i, en := range entries {
		b = le.AppendUint16(b, en.tag)
		b = le.AppendUint16(b, en.typ)
		var v [8]byte
		if len(en.data) > inline {
			le.PutUint64(v[:], where[i])
		} else {
			copy(v[:], en.data)
		}
		if e.big {
			b = le.AppendUint64(b, uint64(en.count))
			b = append(b, v[:8]...)
		} else {
			b = le.AppendUint32(b, uint32(en.count))
			b = append(b, v[:4]...)
		}
	}
	if e.big {
		b = le.AppendUint64(b, next)
	} else {
		b = le.AppendUint32(b, uint32(next))
	}
	for _, en := range entries {
		if len(en.data) > inline {
			b = append(b, en.data...)
			if len(b)&1 != 0 {
				b = append(b, 0)
			}
		}
	}
	e.ifd = b
	if _, err := w.Write(b); err != nil {
		return 0, err
	}
	for _, s := range e.strips {
		if _, err := w.Write(s); err != nil {
			return 0, err
		}
	}
	if pos&1 != 0 {
		if _, err := w.Write([]byte{0}); err != nil {
			return 0, err
		}
	}
	return end, nil
}

// A Writer writes a multi-page TIFF (or BigTIFF) stack, one page per slice, under a
// temporary name beside its target; Close renames it into place once every slice is
// written. It implements volume.Sink.
type Writer struct {
	af   *atomicfile.File
	bw   *bufio.Writer
	enc  *pageEncoder
	h    volume.Header
	z    int
	off  uint64
	err  error
	done bool
	wb   uint64 // bytes handed to startWriteback so far
}

var _ volume.Sink = (*Writer)(nil)

// writeBuffer is the size of the writers' buffer. It gathers the small IFDs; strips
// longer than it go to the file without being copied (bufio writes a large slice
// directly once its buffer is empty), which matters at page-cache speed.
const writeBuffer = 64 << 10

// writebackChunk is how much written data Writer lets accumulate before it asks the
// kernel to start putting it on disk.
const writebackChunk = 2 << 20

// Create starts writing a stack of h.NZ pages to path. The file is BigTIFF when
// opt.BigTIFF asks for it or when an upper bound of its size passes 4 GiB (compressed
// sizes are not known in advance, so the bound assumes incompressible data). Page 0
// carries the spacing: XResolution and YResolution in pixels per centimetre, and an
// ImageDescription of tripass's own with all three spacings and the unit.
func Create(path string, h volume.Header, opt WriteOptions) (*Writer, error) {
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	bound := uint64(16) + uint64(h.NZ)*enc.pageBound()
	enc.big = opt.BigTIFF || bound > math.MaxUint32
	af, err := atomicfile.Create(path, opt.Overwrite)
	if err != nil {
		return nil, err
	}
	w := &Writer{af: af, bw: bufio.NewWriterSize(af, writeBuffer), enc: enc, h: h}
	if w.off, err = writeHeader(w.bw, enc.big); err != nil {
		af.Abort()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return w, nil
}

// BigTIFF reports whether the file is being written as BigTIFF.
func (w *Writer) BigTIFF() bool { return w.enc.big }

// WriteSlice encodes and writes the next slice, which must match the header's size
// and sample type.
func (w *Writer) WriteSlice(s *volume.Slice) error {
	if w.err != nil {
		return w.err
	}
	if w.done {
		return fmt.Errorf("%s: write after Close or Abort", w.af.Target())
	}
	if err := checkSlice(w.h, s, w.z); err != nil {
		return fmt.Errorf("%s: %w", w.af.Target(), err)
	}
	w.enc.encode(s)
	desc := ""
	if w.z == 0 {
		desc = description(w.h)
	}
	off, err := w.enc.writePage(w.bw, w.off, desc, w.z == w.h.NZ-1)
	if err != nil {
		w.err = fmt.Errorf("%s: slice %d: %w", w.af.Target(), w.z, err)
		return w.err
	}
	w.off = off
	w.z++
	if flushed := off - uint64(w.bw.Buffered()); flushed >= w.wb+writebackChunk {
		startWriteback(w.af.File, int64(w.wb), int64(flushed-w.wb))
		w.wb = flushed
	}
	return nil
}

func checkSlice(h volume.Header, s *volume.Slice, z int) error {
	if z >= h.NZ {
		return fmt.Errorf("slice %d written to a stack of %d slices", z, h.NZ)
	}
	if s.NX != h.NX || s.NY != h.NY || s.Type != h.Type || len(s.Data) != h.SliceBytes() {
		return fmt.Errorf("slice %d is %d×%d %s, the stack is %d×%d %s", z, s.NX, s.NY, s.Type, h.NX, h.NY, h.Type)
	}
	return nil
}

// Close finishes the file and moves it to its final name. If fewer slices than the
// header's NZ were written it removes the file and returns volume.ErrShortVolume.
func (w *Writer) Close() error {
	if w.done {
		return nil
	}
	if w.err != nil {
		w.Abort()
		return w.err
	}
	if w.z < w.h.NZ {
		w.Abort()
		return fmt.Errorf("%s: %d of %d slices written: %w", w.af.Target(), w.z, w.h.NZ, volume.ErrShortVolume)
	}
	w.done = true
	if err := w.bw.Flush(); err != nil {
		w.af.Abort()
		return fmt.Errorf("%s: %w", w.af.Target(), err)
	}
	if err := w.af.Commit(); err != nil {
		return fmt.Errorf("%s: %w", w.af.Target(), err)
	}
	return nil
}

// Abort discards the file. It may be called more than once and after Close.
func (w *Writer) Abort() error {
	w.done = true
	return w.af.Abort()
}
