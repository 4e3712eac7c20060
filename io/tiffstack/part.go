package tiffstack

import (
	"bufio"
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"unicode"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// This file holds what a part of a larger job needs from the format: a multi-page stack
// that carries a note of the caller's own (the job it belongs to), and a writer of a
// range of a slice folder's files that other writers fill at the same time.

// notePrefix starts the field of our description line that holds a note.
const notePrefix = "note="

// ErrNoteTooLong is returned by CreateNoted for a note that would not fit in the part
// of an ImageDescription that Open reads back.
var ErrNoteTooLong = errors.New("note too long for the ImageDescription")

// A NotedWriter is a Writer whose page 0 carries a note of the caller's own after
// tripass's spacing line. It implements volume.Sink.
type NotedWriter struct {
	*Writer
	desc string // page 0's ImageDescription
}

var _ volume.Sink = (*NotedWriter)(nil)

// CreateNoted is Create for a stack whose page 0 also carries note, a JSON value, in its
// ImageDescription: "tripass spacing=X,Y,Z unit=U note=JSON". The JSON is stored compact,
// with every white-space character inside its strings written as a \u escape, so that the
// description stays one line of space-separated fields that Open still reads the spacing
// from; (*Reader).Note returns it. The whole description must stay under 4 KiB, the
// part of an ImageDescription that Open reads.
func CreateNoted(path string, h volume.Header, opt WriteOptions, note []byte) (*NotedWriter, error) {
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	field, err := encodeNote(note)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	desc := description(h) + " " + field
	if len(desc)+1 > maxDescription {
		return nil, fmt.Errorf("%s: %d bytes: %w", path, len(desc), ErrNoteTooLong)
	}
	bound := uint64(16) + uint64(h.NZ)*enc.pageBound() + uint64(len(field)) + 2
	enc.big = opt.BigTIFF || bound > math.MaxUint32
	af, err := atomicfile.Create(path, opt.Overwrite)
	if err != nil {
		return nil, err
	}
	w := &Writer{af: af, bw: bufio.NewWriterSize(af, 1<<20), enc: enc, h: h}
	if w.off, err = writeHeader(w.bw, enc.big); err != nil {
		af.Abort()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return &NotedWriter{Writer: w, desc: desc}, nil
}

// WriteSlice writes the next slice; page 0 gets the note.
func (n *NotedWriter) WriteSlice(s *volume.Slice) error {
	w := n.Writer
	if w.z != 0 || w.err != nil || w.done {
		return w.WriteSlice(s)
	}
	if err := checkSlice(w.h, s, 0); err != nil {
		return fmt.Errorf("%s: %w", w.af.Target(), err)
	}
	w.enc.encode(s)
	off, err := w.enc.writePage(w.bw, w.off, n.desc, w.h.NZ == 1)
	if err != nil {
		w.err = fmt.Errorf("%s: slice 0: %w", w.af.Target(), err)
		return w.err
	}
	w.off = off
	w.z++
	return nil
}

// encodeNote turns a JSON value into the description field "note=JSON" with no white
// space in it.
func encodeNote(note []byte) (string, error) {
	var b bytes.Buffer
	if err := json.Compact(&b, note); err != nil {
		return "", fmt.Errorf("note is not JSON: %w", err)
	}
	// After Compact, white space can only stand inside strings, where a \u escape means
	// the same character.
	var out strings.Builder
	out.WriteString(notePrefix)
	for _, r := range b.String() {
		if unicode.IsSpace(r) {
			fmt.Fprintf(&out, `\u%04x`, r)
			continue
		}
		out.WriteRune(r)
	}
	return out.String(), nil
}

// Description returns the ImageDescription of page 0 (at most its first 4 KiB), or "".
func (r *Reader) Description() string { return r.pages[0].desc }

// Note returns the note that CreateNoted stored in page 0's description, or nil when
// the stack has none.
func (r *Reader) Note() []byte { return noteOf(r.pages[0].desc) }

func noteOf(desc string) []byte {
	fields := strings.Fields(desc)
	if len(fields) == 0 || fields[0] != descPrefix {
		return nil
	}
	for _, f := range fields[1:] {
		if v, ok := strings.CutPrefix(f, notePrefix); ok && json.Valid([]byte(v)) {
			return []byte(v)
		}
	}
	return nil
}

// FolderSliceName is the file name of slice z in a folder of nz slices as CreateFolder
// and CreateFolderRange write it: z0000.tif, z0001.tif, …, zero-padded to at least four
// digits and to as many as the last slice's number needs.
func FolderSliceName(nz, z int) string {
	digits := max(4, len(strconv.Itoa(nz-1)))
	return fmt.Sprintf("z%0*d.tif", digits, z)
}

// A FolderRangeWriter writes slices [z0, z1) of a stack of h.NZ slices into a slice
// folder that other writers fill with the other slices at the same time (the tasks of
// one job, each with its own range). Each file is written under a temporary name in
// the folder and renamed into place when complete, replacing a file of the same name,
// so that a reader never sees half a slice and a rerun of the same range rewrites only
// its own files. The files are byte for byte those CreateFolder writes for the same
// slices. It implements volume.Sink.
type FolderRangeWriter struct {
	dir   string
	enc   *pageEncoder
	h     volume.Header
	z, z1 int
	bw    *bufio.Writer
	tmp   *os.File // the file being written, until renamed
	err   error
	done  bool
}

var _ volume.Sink = (*FolderRangeWriter)(nil)

// CreateFolderRange starts writing slices [z0, z1) of the stack described by h (whose
// NZ is the whole stack's) into dir, creating dir and its parents if they are missing.
// Each file carries the spacing as CreateFolder's do. opt.Overwrite is not consulted:
// the caller decides whether the folder may be written to.
func CreateFolderRange(dir string, h volume.Header, opt WriteOptions, z0, z1 int) (*FolderRangeWriter, error) {
	if z0 < 0 || z1 > h.NZ || z0 >= z1 {
		return nil, fmt.Errorf("%s: slice range [%d, %d) is not inside [0, %d)", dir, z0, z1, h.NZ)
	}
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", dir, err)
	}
	enc.big = opt.BigTIFF || 16+enc.pageBound() > math.MaxUint32 // as CreateFolder decides
	if err := os.MkdirAll(dir, 0o777); err != nil {
		return nil, err
	}
	return &FolderRangeWriter{dir: dir, enc: enc, h: h, z: z0, z1: z1, bw: bufio.NewWriterSize(nil, 1<<20)}, nil
}

// Next returns the global index of the slice the next WriteSlice writes.
func (fw *FolderRangeWriter) Next() int { return fw.z }

// WriteSlice writes the next slice of the range as a file of its own.
func (fw *FolderRangeWriter) WriteSlice(s *volume.Slice) error {
	if fw.err != nil {
		return fw.err
	}
	if fw.done {
		return fmt.Errorf("%s: write after Close or Abort", fw.dir)
	}
	name := filepath.Join(fw.dir, FolderSliceName(fw.h.NZ, fw.z))
	if fw.z >= fw.z1 {
		fw.err = fmt.Errorf("%s: slice %d is past the end of the range, which ends at %d", fw.dir, fw.z, fw.z1)
		return fw.err
	}
	if err := checkSlice(fw.h, s, fw.z); err != nil {
		fw.err = fmt.Errorf("%s: %w", name, err)
		return fw.err
	}
	if err := fw.writeFile(s, name); err != nil {
		fw.err = fmt.Errorf("%s: %w", name, err)
		return fw.err
	}
	fw.z++
	return nil
}

func (fw *FolderRangeWriter) writeFile(s *volume.Slice, name string) error {
	fw.enc.encode(s)
	f, err := os.CreateTemp(fw.dir, atomicfile.TempPrefix+filepath.Base(name)+"-*")
	if err != nil {
		return err
	}
	fw.tmp = f
	fw.bw.Reset(f)
	off, err := writeHeader(fw.bw, fw.enc.big)
	if err == nil {
		_, err = fw.enc.writePage(fw.bw, off, description(fw.h), true)
	}
	if err == nil {
		err = fw.bw.Flush()
	}
	if err == nil {
		err = atomicfile.SyncFile(f)
	} else {
		f.Close()
	}
	if err == nil {
		err = os.Rename(f.Name(), name)
	}
	if err != nil {
		os.Remove(f.Name())
	}
	fw.tmp = nil
	return err
}

// Close checks that the whole range was written. The slice files are already in place;
// when fewer than the range's slices were written it returns volume.ErrShortVolume and
// leaves the complete files written so far (each a whole, correct slice).
func (fw *FolderRangeWriter) Close() error {
	if fw.done {
		return nil
	}
	fw.done = true
	if fw.err != nil {
		return fw.err
	}
	if fw.z < fw.z1 {
		return fmt.Errorf("%s: stopped at slice %d of the range ending at %d: %w", fw.dir, fw.z, fw.z1, volume.ErrShortVolume)
	}
	syncDir(fw.dir)
	return nil
}

// Abort stops writing. Slice files already renamed into place stay: each is complete
// and a rerun of the range replaces them. It may be called more than once.
func (fw *FolderRangeWriter) Abort() error {
	fw.done = true
	if fw.tmp != nil {
		fw.tmp.Close()
		os.Remove(fw.tmp.Name())
		fw.tmp = nil
	}
	return nil
}

func syncDir(dir string) {
	if d, err := os.Open(dir); err == nil {
		d.Sync() // best effort: some file systems refuse to sync a folder
		d.Close()
	}
}

// CopyPage writes page z of r as the next page of w without decoding and encoding its
// samples again, when the page is laid out exactly as w would write it: same size and
// sample type, strips (not tiles) of the same rows, the same compression and predictor,
// little-endian. tripass's encoders are deterministic, so the page's strips are then the
// bytes w would write for the same slice, and a stack assembled from parts written with
// the same options equals the stack written in one go, at the speed of a copy. ok is
// false, and nothing is written, when the layouts differ or a strip is larger than the
// encoder can make it; the caller then reads the slice and writes it with WriteSlice.
// The compressed bytes themselves are not decoded, so damage inside a strip that leaves
// the file's structure intact is copied as it is.
func (w *Writer) CopyPage(r *Reader, z int) (ok bool, err error) {
	if w.err != nil {
		return false, w.err
	}
	if w.done {
		return false, fmt.Errorf("%s: write after Close or Abort", w.af.Target())
	}
	if z < 0 || z >= len(r.pages) {
		return false, fmt.Errorf("%s: page %d of a stack of %d", r.name, z, len(r.pages))
	}
	if w.z >= w.h.NZ {
		return false, fmt.Errorf("%s: slice %d written to a stack of %d slices", w.af.Target(), w.z, w.h.NZ)
	}
	p, e := r.pages[z], w.enc
	pred := uint16(predNone)
	if e.opt.Predictor {
		pred = predHoriz
		if w.h.Type.IsFloat() {
			pred = predFloat
		}
	}
	if p.width != w.h.NX || p.height != w.h.NY || p.typ != w.h.Type || p.tiled ||
		p.rowsPerStrip != e.rowsPerStrip || p.n != e.nstrips || p.compression != e.opt.Compression.code() ||
		p.predictor != pred || r.tf.order != binary.LittleEndian {
		return false, nil
	}
	offs, counts, err := r.dec.load(r.tf, p)
	if err != nil {
		return false, fmt.Errorf("%s: %w", r.name, within(fmt.Sprintf("page %d", z), err))
	}
	for i := range counts {
		n := uint64(e.stripBytes(i))
		limit := n // uncompressed strips are exactly the samples
		switch e.opt.Compression {
		case LZW:
			limit = n*3/2 + n/1024 + 16 // as pageBound
		case Deflate:
			limit = n + n/1024 + 64
		}
		if counts[i] > limit || (e.opt.Compression == None && counts[i] != n) {
			return false, nil
		}
	}
	for i := range counts {
		b := e.bufs[i]
		if uint64(cap(b)) < counts[i] {
			b = make([]byte, counts[i])
		}
		b = b[:counts[i]]
		if err := r.tf.readAt(b, offs[i]); err != nil {
			return false, fmt.Errorf("%s: %w", r.name, within(fmt.Sprintf("page %d: strip %d", z, i), err))
		}
		e.bufs[i], e.strips[i] = b, b
	}
	desc := ""
	if w.z == 0 {
		desc = description(w.h)
	}
	off, err := e.writePage(w.bw, w.off, desc, w.z == w.h.NZ-1)
	if err != nil {
		w.err = fmt.Errorf("%s: slice %d: %w", w.af.Target(), w.z, err)
		return false, w.err
	}
	w.off = off
	w.z++
	return true, nil
}
