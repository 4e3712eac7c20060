package tiffstack

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math/bits"
	"runtime"
	"sync"
	"sync/atomic"

	"golang.org/x/image/tiff/lzw"
)

// decoder holds the scratch buffers of a reader, allocated once and reused for every
// strip, tile and page, so that streaming a stack allocates nothing per slice (except
// the LZW decoder's state, which x/image cannot reset). Compressed strips and tiles of
// a large page are decoded by GOMAXPROCS workers, each with its own chunkDecoder.
type decoder struct {
	offs, counts []uint64
	workers      []*chunkDecoder
}

// chunkDecoder is the scratch of one worker.
type chunkDecoder struct {
	comp []byte // compressed bytes of one strip or tile
	tile []byte // one decoded tile
	row  []byte // one row, for the floating-point predictor
	br   bytes.Reader
	zr   io.ReadCloser // zlib reader, reset for each strip
}

// parallelMin is the page size from which compressed chunks are decoded in parallel
// (a variable so that tests can send small fixtures down the parallel path).
var parallelMin = 512 << 10

// forChunks calls fn for chunks 0..n-1 on nw workers and returns the error of the
// lowest-numbered chunk that failed.
func (d *decoder) forChunks(n, nw int, fn func(cd *chunkDecoder, i int) error) error {
	nw = max(1, min(nw, n))
	for len(d.workers) < nw {
		d.workers = append(d.workers, new(chunkDecoder))
	}
	if nw == 1 {
		for i := 0; i < n; i++ {
			if err := fn(d.workers[0], i); err != nil {
				return err
			}
		}
		return nil
	}
	var (
		next   atomic.Int64
		wg     sync.WaitGroup
		mu     sync.Mutex
		first  = n
		errOut error
	)
	for _, cd := range d.workers[:nw] {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := int(next.Add(1)) - 1; i < n; i = int(next.Add(1)) - 1 {
				if err := fn(cd, i); err != nil {
					mu.Lock()
					if i < first {
						first, errOut = i, err
					}
					mu.Unlock()
					return
				}
			}
		}()
	}
	wg.Wait()
	return errOut
}

// maxRatio bounds how many decoded bytes one stored byte can yield, to reject pages
// whose strips are too small for their claimed size before the caller allocates a slice
// for them. PackBits: a 2-byte run gives 128 bytes (TIFF 6.0 Section 9). Deflate: at
// most 1032:1 (zlib's technical notes, from memory). TIFF LZW: a 12-bit code expands to
// at most 4094 bytes (a string as long as the table), under 2730:1; we allow 4096.
func maxRatio(c uint16) uint64 {
	switch c {
	case cNone:
		return 1
	case cPackBits:
		return 64
	case cDeflate, cDeflateOld:
		return 1032
	}
	return 4096
}

func (d *decoder) load(tf *tiffFile, p *page) (offs, counts []uint64, err error) {
	if d.offs, err = tf.uints(&p.offsets, d.offs); err != nil {
		return nil, nil, within("offsets", err)
	}
	if d.counts, err = tf.uints(&p.counts, d.counts); err != nil {
		return nil, nil, within("byte counts", err)
	}
	return d.offs, d.counts, nil
}

// checkChunks checks that every strip or tile of p lies inside the file and that,
// together, they can hold the page.
func (d *decoder) checkChunks(tf *tiffFile, p *page) error {
	offs, counts, err := d.load(tf, p)
	if err != nil {
		return err
	}
	what := "strip"
	if p.tiled {
		what = "tile"
	}
	size := uint64(tf.size)
	var total uint64
	for i, o := range offs {
		c := counts[i]
		if c == 0 {
			return FormatError(fmt.Sprintf("%s %d has a byte count of 0", what, i))
		}
		if o > size || c > size-o {
			return FormatError(fmt.Sprintf("%s %d: %d bytes at offset %d run past the end of the file (%d bytes)", what, i, c, o, size))
		}
		if p.compression == cNone && c < uint64(p.chunkBytes(i)) {
			return FormatError(fmt.Sprintf("uncompressed %s %d holds %d bytes, want %d", what, i, c, p.chunkBytes(i)))
		}
		total += c
	}
	need := uint64(p.width) * uint64(p.height) * uint64(p.typ.Size())
	if p.tiled {
		need = uint64(p.n) * uint64(p.tileW*p.tileH*p.typ.Size()) // whole tiles are decoded
	}
	const slack = 1024 // headers and end codes of tiny strips
	if need > total*maxRatio(p.compression)+slack {
		return FormatError(fmt.Sprintf("%d bytes of %s data cannot hold a %d×%d %s page", total, compressionName(p.compression), p.width, p.height, p.typ))
	}
	return nil
}

func grow(b []byte, n int) []byte {
	if cap(b) < n {
		return make([]byte, n)
	}
	return b[:n]
}

// decodePage decodes page p into dst (width×height little-endian samples).
func (d *decoder) decodePage(tf *tiffFile, p *page, dst []byte) error {
	offs, counts, err := d.load(tf, p)
	if err != nil {
		return err
	}
	bs := p.typ.Size()
	swap := tf.order == binary.BigEndian && bs > 1
	nw := 1
	if p.compression != cNone && len(dst) >= parallelMin {
		nw = runtime.GOMAXPROCS(0)
	}
	if !p.tiled {
		rowBytes := p.width * bs
		if p.compression != cNone {
			return d.forChunks(p.n, nw, func(cd *chunkDecoder, i int) error {
				lo := i * p.rowsPerStrip * rowBytes
				if err := cd.decodeChunk(tf, p, dst[lo:lo+p.chunkBytes(i)], offs[i], counts[i], p.width); err != nil {
					return within(fmt.Sprintf("strip %d", i), err)
				}
				return nil
			})
		}
		for i := 0; i < p.n; {
			// Read runs of strips that follow each other in the file in one call,
			// straight into dst.
			lo := i * p.rowsPerStrip * rowBytes
			nb := p.chunkBytes(i)
			j, end, hi := i+1, offs[i]+uint64(nb), lo+nb
			for j < p.n && offs[j] == end {
				m := p.chunkBytes(j)
				end, hi, j = end+uint64(m), hi+m, j+1
			}
			if err := tf.readAt(dst[lo:hi], offs[i]); err != nil {
				return within(fmt.Sprintf("strip %d", i), err)
			}
			if swap {
				swapBytes(dst[lo:hi], bs)
			}
			i = j
		}
		return nil
	}
	tb := p.tileW * p.tileH * bs
	across := (p.width + p.tileW - 1) / p.tileW
	return d.forChunks(p.n, nw, func(cd *chunkDecoder, i int) error {
		cd.tile = grow(cd.tile, tb)
		tile := cd.tile
		if p.compression == cNone {
			if err := tf.readAt(tile, offs[i]); err != nil {
				return within(fmt.Sprintf("tile %d", i), err)
			}
			if swap {
				swapBytes(tile, bs)
			}
		} else if err := cd.decodeChunk(tf, p, tile, offs[i], counts[i], p.tileW); err != nil {
			return within(fmt.Sprintf("tile %d", i), err)
		}
		x0, y0 := (i%across)*p.tileW, (i/across)*p.tileH
		cw, ch := min(p.tileW, p.width-x0)*bs, min(p.tileH, p.height-y0)
		for r := 0; r < ch; r++ {
			o := ((y0+r)*p.width + x0) * bs
			copy(dst[o:o+cw], tile[r*p.tileW*bs:])
		}
		return nil
	})
}

// decodeChunk decompresses one strip or tile into out, undoes its predictor and leaves
// little-endian samples. rowLen is the number of samples in one of its rows.
func (d *chunkDecoder) decodeChunk(tf *tiffFile, p *page, out []byte, off, cnt uint64, rowLen int) error {
	d.comp = grow(d.comp, int(cnt))
	src := d.comp
	if err := tf.readAt(src, off); err != nil {
		return err
	}
	name := compressionName(p.compression)
	var err error
	switch p.compression {
	case cPackBits:
		err = unpackBits(out, src)
	case cLZW:
		d.br.Reset(src)
		zr := lzw.NewReader(&d.br, lzw.MSB, 8)
		_, err = io.ReadFull(zr, out)
		zr.Close()
	case cDeflate, cDeflateOld:
		d.br.Reset(src)
		if d.zr == nil {
			d.zr, err = zlib.NewReader(&d.br)
		} else {
			err = d.zr.(zlib.Resetter).Reset(&d.br, nil)
		}
		if err == nil {
			_, err = io.ReadFull(d.zr, out)
		}
	}
	if err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return fmt.Errorf("%s data ends early: %w", name, io.ErrUnexpectedEOF)
		}
		return FormatError(fmt.Sprintf("%s data: %v", name, err))
	}
	bs := p.typ.Size()
	rowBytes := rowLen * bs
	switch p.predictor {
	case predFloat:
		d.row = grow(d.row, rowBytes)
		for r := 0; r+rowBytes <= len(out); r += rowBytes {
			undoFloatPredictor(out[r:r+rowBytes], d.row, bs)
		}
		return nil
	case predHoriz:
		if tf.order == binary.BigEndian && bs > 1 {
			swapBytes(out, bs)
		}
		for r := 0; r+rowBytes <= len(out); r += rowBytes {
			undoHorizontal(out[r:r+rowBytes], bs)
		}
		return nil
	}
	if tf.order == binary.BigEndian && bs > 1 {
		swapBytes(out, bs)
	}
	return nil
}

// unpackBits decodes PackBits (TIFF 6.0 Section 9) into dst. A run that overflows dst
// is cut, as libtiff does.
func unpackBits(dst, src []byte) error {
	for len(dst) > 0 {
		if len(src) == 0 {
			return io.ErrUnexpectedEOF
		}
		n := int(int8(src[0]))
		src = src[1:]
		switch {
		case n >= 0: // n+1 literal bytes
			m := n + 1
			if len(src) < m {
				return io.ErrUnexpectedEOF
			}
			k := copy(dst, src[:m])
			dst, src = dst[k:], src[m:]
		case n == -128: // no operation
		default: // one byte repeated 1-n times
			if len(src) == 0 {
				return io.ErrUnexpectedEOF
			}
			m := min(1-n, len(dst))
			c := src[0]
			src = src[1:]
			for i := range dst[:m] {
				dst[i] = c
			}
			dst = dst[m:]
		}
	}
	return nil
}

// undoHorizontal reverses horizontal differencing (TIFF 6.0 Section 14) on one row of
// little-endian samples of bs bytes: each sample is stored as its difference from the
// one before, modulo 2^(8·bs).
func undoHorizontal(row []byte, bs int) {
	le := binary.LittleEndian
	switch bs {
	case 1:
		for i := 1; i < len(row); i++ {
			row[i] += row[i-1]
		}
	case 2:
		n := len(row) / 2 * 2
		var prev uint16
		for i := 0; i < n; i += 2 {
			prev += le.Uint16(row[i:])
			le.PutUint16(row[i:], prev)
		}
	case 4:
		n := len(row) / 4 * 4
		var prev uint32
		for i := 0; i < n; i += 4 {
			prev += le.Uint32(row[i:])
			le.PutUint32(row[i:], prev)
		}
	case 8:
		n := len(row) / 8 * 8
		var prev uint64
		for i := 0; i < n; i += 8 {
			prev += le.Uint64(row[i:])
			le.PutUint64(row[i:], prev)
		}
	}
}

// undoFloatPredictor reverses the floating-point predictor of Adobe Photoshop TIFF
// Technical Note 3 (2005) on one row: the bytes were differenced across the whole row
// after the samples had been split into byte planes, most significant plane first. The
// byte order of the file plays no part in it. tmp must hold len(row) bytes.
func undoFloatPredictor(row, tmp []byte, bs int) {
	for i := 1; i < len(row); i++ {
		row[i] += row[i-1]
	}
	copy(tmp, row)
	n := len(row) / bs
	for b := 0; b < bs; b++ {
		plane := tmp[(bs-1-b)*n : (bs-b)*n] // little-endian byte b is plane bs-1-b
		for s, v := range plane {
			row[s*bs+b] = v
		}
	}
}

// swapBytes reverses the byte order of every bs-byte sample in b.
func swapBytes(b []byte, bs int) {
	le := binary.LittleEndian
	switch bs {
	case 2:
		i := 0
		for ; i+8 <= len(b); i += 8 {
			x := le.Uint64(b[i:])
			le.PutUint64(b[i:], (x&0x00ff00ff00ff00ff)<<8|(x>>8)&0x00ff00ff00ff00ff)
		}
		for ; i+2 <= len(b); i += 2 {
			b[i], b[i+1] = b[i+1], b[i]
		}
	case 4:
		i := 0
		for ; i+4 <= len(b); i += 4 {
			le.PutUint32(b[i:], bits.ReverseBytes32(le.Uint32(b[i:])))
		}
	case 8:
		for i := 0; i+8 <= len(b); i += 8 {
			le.PutUint64(b[i:], bits.ReverseBytes64(le.Uint64(b[i:])))
		}
	}
}
