package nifti

import (
	"bufio"
	"compress/flate"
	"compress/gzip"
	"encoding/binary"
	"errors"
	"fmt"
	"io"
	"math"
	"os"

	"github.com/tripass/tripass/volume"
)

// readBufSize is the read buffer under the data (and under the gzip stream): large
// enough that system calls cost nothing beside moving the bytes (common practice).
const readBufSize = 1 << 20

// maxDeflateRatio bounds how many bytes deflate can produce per compressed byte:
// 1032:1 (zlib's technical notes, zlib.net/zlib_tech.html; value from memory). A
// .nii.gz smaller than its header's data divided by this cannot hold them, so a
// hostile header is refused before anything is read or allocated.
const maxDeflateRatio = 1032

// gzipMagic starts every gzip member (RFC 1952).
var gzipMagic = [2]byte{0x1f, 0x8b}

// Reader reads a NIfTI-1 volume slice by slice, from a .nii file or through a gzip
// stream for .nii.gz (detected from the file's first bytes, not its name). It
// implements volume.Source and volume.SliceSeeker. A Reader is not safe for
// concurrent use.
type Reader struct {
	path string
	f    io.ReadSeekCloser
	size int64
	raw  *rawHeader
	p    *parsed
	br   *bufio.Reader // over f
	gz   *gzip.Reader  // over br for .nii.gz; nil for .nii
	src  io.Reader     // br or gz: where the next slice's bytes come from
	swap bool          // the file is big-endian and samples are wider than a byte

	stored  []byte    // a slice as stored, when it must be converted (int8, scaling)
	values  []float64 // a slice's stored values, when scaling
	z       int       // the slice the next ReadSlice returns
	err     error     // a failed read leaves the stream in an unknown place
	checked bool      // the gzip stream's end has been checked
}

var (
	_ volume.Source      = (*Reader)(nil)
	_ volume.SliceSeeker = (*Reader)(nil)
)

// Open opens the NIfTI-1 file at path (.nii, or .nii.gz, which is read as a stream)
// and checks its header. Errors are *FormatError for files that are not valid NIfTI-1,
// *UnsupportedError for NIfTI that tripass does not handle (4D series, complex or RGB
// data, NIfTI-2, .hdr/.img pairs), and the operating system's errors for failures to
// read. Open reads the header and nothing of the data.
func Open(path string) (*Reader, error) { return open(path, -1) }

// OpenVolume opens volume vol (counted from 0) of a NIfTI-1 series (a 4D file, or 5D
// with one volume per index) as a 3D volume; volume 0 of a 3D file is the file. It is
// how a caller processes a time series volume by volume, where Open refuses it. The
// header, orientation and scaling are the file's, shared by all its volumes. In a
// .nii.gz the volumes before vol are decompressed and discarded.
func OpenVolume(path string, vol int) (*Reader, error) {
	if vol < 0 {
		return nil, fmt.Errorf("nifti: %s: volume %d: volumes are numbered from 0", path, vol)
	}
	return open(path, vol)
}

// Volumes is the number of volumes in the file (1 for a 3D volume).
func (r *Reader) Volumes() int { return int(r.p.volumes) }

func open(path string, vol int) (*Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("nifti: %w", err)
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("nifti: %w", err)
	}
	if !st.Mode().IsRegular() {
		f.Close()
		return nil, &FormatError{Path: path, Msg: "not a regular file"}
	}
	r, err := newReader(path, f, st.Size(), vol)
	if err != nil {
		f.Close()
		return nil, err
	}
	return r, nil
}

// newReader reads the header of a NIfTI-1 file of size bytes from f and positions the
// reader at the first slice. Open and the fuzz tests share it; it does not close f.
func newReader(path string, f io.ReadSeekCloser, size int64, vol int) (*Reader, error) {
	r := &Reader{path: path, f: f, size: size}
	var lead [2]byte
	n, err := io.ReadFull(f, lead[:])
	if err != nil && n < len(lead) {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf("header truncated: the file is %d bytes, a NIfTI-1 header needs %d", size, headerSize)}
		}
		return nil, fmt.Errorf("nifti: %s: reading the header: %w", path, err)
	}
	if err := r.rewind(); err != nil {
		return nil, err
	}
	if lead == gzipMagic {
		gz, err := gzip.NewReader(r.br)
		if err != nil {
			return nil, r.dataError("the gzip header", err)
		}
		r.gz, r.src = gz, gz
	}
	var hb [headerSize]byte
	if k, err := io.ReadFull(r.src, hb[:]); err != nil {
		if errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF) {
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf("header truncated: %d of %d bytes", k, headerSize)}
		}
		return nil, r.dataError("the header", err)
	}
	raw, err := decodeHeader(path, hb[:])
	if err != nil {
		return nil, err
	}
	p, err := raw.parse(path, vol)
	if err != nil {
		return nil, err
	}
	r.raw, r.p = raw, p
	end := p.fileBytes() // ≤ 2^62 + 2^43: no overflow
	data, dims := p.fileBytes()-p.voxOffset, fmt.Sprintf("%d×%d×%d", p.h.NX, p.h.NY, p.h.NZ)
	if p.volumes > 1 {
		dims += fmt.Sprintf("×%d", p.volumes)
	}
	if r.gz == nil {
		if end > size {
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf(
				"the file is %d bytes, but its header places %d bytes of %v data (%s) at vox_offset %d, ending at byte %d",
				size, data, p.stored, dims, p.voxOffset, end)}
		}
	} else if end/maxDeflateRatio > size {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf(
			"the compressed file is %d bytes, too small for the %d bytes of %v data (%s) its header claims (deflate expands at most %d:1)",
			size, data, p.stored, dims, maxDeflateRatio)}
	}
	r.swap = raw.order == binary.BigEndian && p.stored.Size() > 1
	if r.gz == nil {
		if err := r.seekData(0, false); err != nil {
			return nil, err
		}
	} else if skip := p.dataStart - headerSize; skip > 0 {
		// Extensions between the header and the data, and earlier volumes: skip them.
		if n, err := io.CopyN(io.Discard, r.gz, skip); err != nil {
			return nil, r.dataError(fmt.Sprintf("the header extensions or earlier volumes (%d of %d bytes)", n, skip), err)
		}
	}
	return r, nil
}

// rewind puts f and the buffered reader over it at the start of the file.
func (r *Reader) rewind() error {
	if _, err := r.f.Seek(0, io.SeekStart); err != nil {
		return fmt.Errorf("nifti: %s: seek: %w", r.path, err)
	}
	if r.br == nil {
		n := readBufSize
		if r.size < int64(n) {
			n = int(max(r.size, 16)) // a small file needs no large buffer
		}
		r.br = bufio.NewReaderSize(r.f, n)
	} else {
		r.br.Reset(r.f)
	}
	r.src = r.br
	return nil
}

// seekData positions the reader at slice z. An uncompressed file seeks; a gzip stream
// goes on decompressing and discarding forward, and restarts from the beginning to go
// back or when restart is set (after an error, the stream's place is unknown).
func (r *Reader) seekData(z int, restart bool) error {
	sb := int64(r.p.storedSliceBytes())
	if r.gz == nil {
		pos := r.p.dataStart + int64(z)*sb
		if _, err := r.f.Seek(pos, io.SeekStart); err != nil {
			return fmt.Errorf("nifti: %s: seek: %w", r.path, err)
		}
		r.br.Reset(r.f)
		r.z = z
		return nil
	}
	skip := int64(z-r.z) * sb
	if restart || z < r.z {
		if err := r.rewind(); err != nil {
			return err
		}
		if err := r.gz.Reset(r.br); err != nil {
			return r.dataError("the gzip header", err)
		}
		r.src = r.gz
		skip = r.p.dataStart + int64(z)*sb
	}
	if skip > 0 {
		if n, err := io.CopyN(io.Discard, r.gz, skip); err != nil {
			return r.dataError(fmt.Sprintf("seeking to slice %d (%d of %d bytes skipped)", z, n, skip), err)
		}
	}
	r.z = z
	r.checked = false
	return nil
}

// dataError describes a failure to read part of the file: a truncated file or
// corrupt compressed data become a *FormatError, anything else is the operating
// system's error.
func (r *Reader) dataError(what string, err error) error {
	var corrupt flate.CorruptInputError
	switch {
	case errors.Is(err, io.EOF) || errors.Is(err, io.ErrUnexpectedEOF):
		msg := "truncated file: it ends in " + what
		if r.gz != nil {
			msg = "truncated .nii.gz: the compressed data end in " + what
		}
		return &FormatError{Path: r.path, Msg: msg, Err: io.ErrUnexpectedEOF}
	case errors.Is(err, gzip.ErrChecksum), errors.Is(err, gzip.ErrHeader), errors.As(err, &corrupt):
		return &FormatError{Path: r.path, Msg: "corrupt compressed data in " + what, Err: err}
	}
	return fmt.Errorf("nifti: %s: reading %s: %w", r.path, what, err)
}

// Header returns the volume's size, spacing and unit, and the sample type ReadSlice
// delivers: the stored type, except that int8 comes as Int16 and scaled data (see
// Scaling) as Float32 (Float64 when stored as float64).
func (r *Reader) Header() volume.Header { return r.p.h }

// Orientation returns the qform and sform fields of the header, as stored.
func (r *Reader) Orientation() Orientation { return r.raw.orient }

// Description returns the header's descrip field (up to 80 bytes of text).
func (r *Reader) Description() string { return r.raw.descrip }

// Datatype returns the datatype the samples are stored in.
func (r *Reader) Datatype() Datatype { return r.p.stored }

// ByteOrder returns the byte order of the file (ReadSlice always delivers
// little-endian samples).
func (r *Reader) ByteOrder() binary.ByteOrder { return r.raw.order }

// Compressed reports whether the file is gzip-compressed. Seeking in a compressed
// file decompresses everything up to the slice sought.
func (r *Reader) Compressed() bool { return r.gz != nil }

// Scaling returns scl_slope and scl_inter as the header stores them, and whether
// ReadSlice applies them. They are applied, giving slope·stored + inter computed in
// float64 and rounded to the delivered float type, unless the slope is 0 or not
// finite (no scaling, as nifti1.h and nibabel read it) or the pair is the identity
// (slope 1, intercept 0), in which case the stored values come through unchanged.
func (r *Reader) Scaling() (slope, inter float64, applied bool) {
	return float64(r.raw.sclSlope), float64(r.raw.sclInter), r.p.scaled
}

// ReadSlice reads the next slice into dst, resizing it to the header's size and sample
// type, and returns io.EOF after the last. Samples are delivered little-endian. A
// truncated file or corrupt compressed data give a *FormatError (wrapping
// io.ErrUnexpectedEOF for truncation); the gzip stream's checksum is verified with the
// last slice.
func (r *Reader) ReadSlice(dst *volume.Slice) error {
	if r.err != nil {
		return r.err
	}
	h := r.p.h
	if r.z >= h.NZ {
		return io.EOF
	}
	dst.Reset(h.NX, h.NY, h.Type)
	convert := r.p.scaled || r.p.stored == Int8
	buf := dst.Data
	if convert {
		if r.stored == nil {
			r.stored = make([]byte, r.p.storedSliceBytes())
		}
		buf = r.stored
	}
	if _, err := io.ReadFull(r.src, buf); err != nil {
		r.err = r.dataError(fmt.Sprintf("slice %d of %d", r.z, h.NZ), err)
		return r.err
	}
	if r.swap {
		swapBytes(buf, r.p.stored.Size())
	}
	if convert {
		r.convert(dst, buf)
	}
	r.z++
	if r.z == h.NZ && r.gz != nil && !r.checked && r.p.dataStart+r.p.storedBytes() == r.p.fileBytes() {
		r.checked = true
		// Reading past the data makes the gzip reader verify its checksum and length.
		// It then looks for another gzip member: gzip.ErrHeader there means bytes
		// after a complete, verified stream (padding), which are ignored as trailing
		// bytes of a .nii are.
		var one [1]byte
		if _, err := io.ReadFull(r.gz, one[:]); err != nil && err != io.EOF && !errors.Is(err, gzip.ErrHeader) {
			r.err = r.dataError("the gzip trailer (checksum and length)", err)
			return r.err
		}
	}
	return nil
}

// convert turns a slice of stored samples (little-endian) into dst's type: int8 into
// int16, or any type through the scaling into float32 or float64.
func (r *Reader) convert(dst *volume.Slice, src []byte) {
	n := dst.Len()
	if !r.p.scaled { // int8 → int16, exact
		d := dst.Data[:2*n]
		src = src[:n]
		for i, v := range src {
			binary.LittleEndian.PutUint16(d[2*i:], uint16(int16(int8(v))))
		}
		return
	}
	if r.values == nil {
		r.values = make([]float64, n)
	}
	v := r.values[:n]
	le := binary.LittleEndian
	switch r.p.stored {
	case Uint8:
		for i := range v {
			v[i] = float64(src[i])
		}
	case Int8:
		for i := range v {
			v[i] = float64(int8(src[i]))
		}
	case Int16:
		for i := range v {
			v[i] = float64(int16(le.Uint16(src[2*i:])))
		}
	case Uint16:
		for i := range v {
			v[i] = float64(le.Uint16(src[2*i:]))
		}
	case Int32:
		for i := range v {
			v[i] = float64(int32(le.Uint32(src[4*i:])))
		}
	case Uint32:
		for i := range v {
			v[i] = float64(le.Uint32(src[4*i:]))
		}
	case Float32:
		for i := range v {
			v[i] = float64(math.Float32frombits(le.Uint32(src[4*i:])))
		}
	case Float64:
		for i := range v {
			v[i] = math.Float64frombits(le.Uint64(src[8*i:]))
		}
	}
	slope, inter := r.p.slope, r.p.inter
	if dst.Type == volume.Float64 {
		d := dst.Data[:8*n]
		for i, x := range v {
			// The explicit conversion keeps the product rounded on its own (no fused
			// multiply-add), as NumPy computes it.
			le.PutUint64(d[8*i:], math.Float64bits(float64(x*slope)+inter))
		}
		return
	}
	d := dst.Data[:4*n]
	for i, x := range v {
		le.PutUint32(d[4*i:], math.Float32bits(float32(float64(x*slope)+inter)))
	}
}

// SeekSlice makes the next ReadSlice return slice z (0 ≤ z ≤ NZ; z = NZ gives
// io.EOF). A .nii file seeks directly; a .nii.gz decompresses and discards the slices
// in between, from the start of the file when z is behind the current slice.
func (r *Reader) SeekSlice(z int) error {
	if z < 0 || z > r.p.h.NZ {
		return fmt.Errorf("nifti: %s: seek to slice %d of a volume of %d slices", r.path, z, r.p.h.NZ)
	}
	restart := r.err != nil
	r.err = nil
	if err := r.seekData(z, restart); err != nil {
		r.err = err
		return err
	}
	return nil
}

// Close closes the file.
func (r *Reader) Close() error {
	if r.f == nil {
		return nil
	}
	err := r.f.Close()
	r.f = nil
	if err != nil {
		return fmt.Errorf("nifti: %w", err)
	}
	return nil
}

// swapBytes reverses the bytes of every size-byte sample of b in place.
func swapBytes(b []byte, size int) {
	switch size {
	case 2:
		for i := 0; i+1 < len(b); i += 2 {
			b[i], b[i+1] = b[i+1], b[i]
		}
	case 4:
		for i := 0; i+3 < len(b); i += 4 {
			binary.LittleEndian.PutUint32(b[i:], binary.BigEndian.Uint32(b[i:]))
		}
	case 8:
		for i := 0; i+7 < len(b); i += 8 {
			binary.LittleEndian.PutUint64(b[i:], binary.BigEndian.Uint64(b[i:]))
		}
	}
}
