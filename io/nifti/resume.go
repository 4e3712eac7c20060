package nifti

import (
	"bytes"
	"compress/flate"
	"fmt"
	"hash/crc32"
	"io"
	"strings"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// Resumable reports whether path names an output that CreateResumable and Resume can
// continue after an interruption: a .nii or .nii.gz file.
//
// A .nii.gz is one gzip member whose deflate data are cut into chunks of gzipChunk
// uncompressed bytes at fixed offsets, each compressed on its own and ended with a
// sync flush (gzipstream.go). A cut after a whole chunk is therefore a place the
// stream can continue from with exactly the bytes an uninterrupted run writes: the
// chunks that follow do not depend on the ones before, and the trailer's CRC-32 and
// length continue from the uncompressed bytes already in the file, which Resume reads
// back.
func Resumable(path string) bool {
	lower := strings.ToLower(path)
	return strings.HasSuffix(lower, ".nii") || strings.HasSuffix(lower, ".nii.gz")
}

// CreateResumable is Create with a temporary file of fixed name
// (atomicfile.PartName of path), so that a run that is interrupted or killed can be
// continued by Resume. Call Sync from time to time to learn how much is durable;
// Suspend keeps the partial file when the run stops early.
func CreateResumable(path string, h volume.Header, opt WriteOptions) (*Writer, error) {
	return openPart(path, h, opt, 0, 0)
}

// Resume continues the partial file of an interrupted CreateResumable run with the same
// path, header and options after its first done slices, which end at byte size of the
// file (what Sync returned): the header must be the one this run writes, the file is
// cut back to size, and the next WriteSlice writes slice done. The result is byte for byte the file of an
// uninterrupted run.
func Resume(path string, h volume.Header, opt WriteOptions, done int, size int64) (*Writer, error) {
	if done < 0 || done > h.NZ {
		return nil, fmt.Errorf("nifti: %s: cannot resume after slice %d of %d", path, done, h.NZ)
	}
	return openPart(path, h, opt, done, size)
}

func openPart(path string, h volume.Header, opt WriteOptions, done int, size int64) (*Writer, error) {
	if !Resumable(path) {
		return nil, &UnsupportedError{Path: path, Msg: "a NIfTI-1 output's name must end in .nii or .nii.gz"}
	}
	// Create checks the path, header and options; its temporary file, still empty
	// (the header waits in the buffer), gives way to the partial file of fixed name.
	w, err := Create(path, h, opt)
	if err != nil {
		return nil, err
	}
	if w.gz != nil {
		w.gz.Abort()
	}
	w.f.Abort()
	w.closed = false
	o := PlainOrientation(h)
	if opt.Orientation != nil {
		o = *opt.Orientation
	}
	hdr := encodeHeader(h, o, descripField(opt.Description))
	if done == 0 {
		w.f, err = atomicfile.CreatePart(path, opt.Overwrite)
	} else {
		w.f, err = atomicfile.OpenPart(path, opt.Overwrite)
	}
	if err != nil {
		w.closed = true
		return nil, fmt.Errorf("nifti: %w", err)
	}
	w.bw.Reset(w.f)
	w.w = w.bw
	fail := func(err error) (*Writer, error) {
		w.closed = true
		if done == 0 {
			w.f.Abort()
		} else {
			w.f.Detach()
		}
		return nil, fmt.Errorf("nifti: %s: %w", path, err)
	}
	if done == 0 {
		if w.gz != nil {
			if w.gz, err = newGzipStream(w.bw, gzipLevel); err != nil {
				return fail(err)
			}
			w.w = w.gz
		}
		if _, err := w.w.Write(hdr); err != nil {
			return fail(fmt.Errorf("writing the header: %w", err))
		}
		return w, nil
	}
	if w.gz != nil {
		return resumeGzip(w, hdr, done, size, fail)
	}
	got := make([]byte, len(hdr))
	if _, err := io.ReadFull(w.f.File, got); err != nil || !bytes.Equal(got, hdr) {
		return fail(fmt.Errorf("the partial output %s does not start with this run's header", w.f.File.Name()))
	}
	if err := w.f.ContinueAt(int64(len(hdr)) + int64(done)*int64(h.SliceBytes())); err != nil {
		return fail(err)
	}
	w.z = done
	return w, nil
}

// resumeGzip continues a partial .nii.gz after slice done. The partial file, cut at
// size (what Sync returned, the end of a whole chunk), is read back: its uncompressed
// bytes give the CRC-32 and length the trailer continues from, their start must be
// this run's header, and their count says where in slice done the next chunk starts,
// so that the bytes of that slice before it are not written twice. Reading back costs
// a decompression of the partial output.
func resumeGzip(w *Writer, hdr []byte, done int, size int64, fail func(error) (*Writer, error)) (*Writer, error) {
	var member bytes.Buffer // the member header this run writes
	probe, err := newGzipStream(&member, gzipLevel)
	if err != nil {
		return fail(err)
	}
	probe.Abort()
	got := make([]byte, member.Len())
	if _, err := io.ReadFull(w.f.File, got); err != nil || !bytes.Equal(got, member.Bytes()) || size < int64(member.Len()) {
		return fail(fmt.Errorf("the partial output %s does not start with this run's gzip header", w.f.File.Name()))
	}
	rb := &readBack{want: hdr}
	fr := flate.NewReader(io.NewSectionReader(w.f.File, int64(member.Len()), size-int64(member.Len())))
	_, err = io.Copy(rb, fr)
	// A stream cut after a sync flush ends without its final block.
	if err != io.ErrUnexpectedEOF && err != nil || rb.bad {
		return fail(fmt.Errorf("the partial output %s does not hold this run's data up to byte %d", w.f.File.Name(), size))
	}
	sb := int64(w.h.SliceBytes())
	start := int64(len(hdr)) + int64(done)*sb
	skip := rb.n - start
	if skip < 0 || skip >= sb && !(done == w.h.NZ && skip == 0) || rb.n%gzipChunk != 0 {
		return fail(fmt.Errorf("the partial output %s holds %d bytes of data, which do not end a chunk in slice %d", w.f.File.Name(), rb.n, done))
	}
	if err := w.f.ContinueAt(size); err != nil {
		return fail(err)
	}
	gz, err := newGzipStream(io.Discard, gzipLevel) // its member header is already in the file
	if err != nil {
		return fail(err)
	}
	gz.out, gz.crc, gz.size = w.bw, rb.crc, uint32(rb.n) // size mod 2^32, as RFC 1952 ISIZE
	w.gz, w.z = gz, done
	w.w = &skipWriter{w: gz, skip: skip}
	return w, nil
}

// readBack checks and sums the uncompressed bytes of a partial .nii.gz.
type readBack struct {
	want []byte // the header the bytes must start with
	n    int64
	crc  uint32
	bad  bool
}

func (r *readBack) Write(p []byte) (int, error) {
	if r.n < int64(len(r.want)) {
		k := min(int64(len(p)), int64(len(r.want))-r.n)
		if !bytes.Equal(p[:k], r.want[r.n:r.n+k]) {
			r.bad = true
		}
	}
	r.crc = crc32.Update(r.crc, crc32.IEEETable, p)
	r.n += int64(len(p))
	return len(p), nil
}

// skipWriter drops the first skip bytes written to it: the start of the first slice of
// a resumed .nii.gz, which the partial file already holds.
type skipWriter struct {
	w    io.Writer
	skip int64
}

func (s *skipWriter) Write(p []byte) (int, error) {
	n := len(p)
	if s.skip > 0 {
		k := min(int64(len(p)), s.skip)
		s.skip -= k
		p = p[k:]
	}
	if len(p) == 0 {
		return n, nil
	}
	if _, err := s.w.Write(p); err != nil {
		return 0, err
	}
	return n, nil
}

// drain waits until every chunk handed to the workers has been written out: then the
// jobs are all back in the free list but the one being filled.
func (s *gzipStream) drain() {
	held := make([]*gzipJob, 0, cap(s.free)-1)
	for len(held) < cap(s.free)-1 {
		held = append(held, <-s.free)
	}
	for _, j := range held {
		s.free <- j
	}
}

// Sync makes what was written durable (it flushes the buffer and syncs the file) and
// returns the file's length and how many slices a resumed run must write again from:
// every slice written for a .nii; for a .nii.gz, the slices before the one in which the
// last whole compressed chunk ends (the rest of that slice is in the file, the chunk
// being filled is not).
func (w *Writer) Sync() (slices int, size int64, err error) {
	switch {
	case w.closed:
		return 0, 0, fmt.Errorf("nifti: %s: Sync after Close or Abort", w.path)
	case w.err != nil:
		return 0, 0, w.err
	}
	var pending int64 // uncompressed bytes not yet in the file
	if w.gz != nil {
		w.gz.drain()
		if err := w.gz.failed(); err != nil {
			w.err = fmt.Errorf("nifti: %s: writing: %w", w.path, err)
			return 0, 0, w.err
		}
		pending = int64(len(w.gz.cur.data))
	}
	if err := w.bw.Flush(); err != nil {
		w.err = fmt.Errorf("nifti: %s: writing: %w", w.path, err)
		return 0, 0, w.err
	}
	if err := w.f.File.Sync(); err != nil {
		w.err = fmt.Errorf("nifti: %s: syncing: %w", w.path, err)
		return 0, 0, w.err
	}
	st, err := w.f.File.Stat()
	if err != nil {
		return 0, 0, fmt.Errorf("nifti: %s: %w", w.path, err)
	}
	if w.gz == nil {
		return w.z, st.Size(), nil
	}
	// The file ends after a whole chunk; a resumed run starts from the slice that
	// chunk ends in.
	sb := int64(w.h.SliceBytes())
	pos := int64(minVoxOffset) + int64(w.z)*sb
	if sw, ok := w.w.(*skipWriter); ok {
		pos += sw.skip // a resumed run's first slice, not yet written
	}
	durable := pos - pending
	if durable < minVoxOffset {
		return 0, st.Size(), nil
	}
	return int((durable - minVoxOffset) / sb), st.Size(), nil
}

// Suspend stops writing but keeps the partial file for Resume: it syncs what was
// written, stops the compressing goroutines of a .nii.gz, closes the file and returns
// what Sync returns.
func (w *Writer) Suspend() (slices int, size int64, err error) {
	slices, size, err = w.Sync()
	w.closed = true
	if w.gz != nil {
		w.gz.Abort() // the chunk being filled is not kept
	}
	if derr := w.f.Detach(); err == nil && derr != nil {
		err = fmt.Errorf("nifti: %s: syncing: %w", w.path, derr)
	}
	return slices, size, err
}
