package tiffstack

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/volume"
)

// A FolderReader reads a folder of single-page TIFF files as a stack, one file per
// z-slice. It implements volume.Source and volume.SliceSeeker.
type FolderReader struct {
	dir   string
	files []string // full paths, in slice order
	hdr   volume.Header
	info  Info
	z     int
	dec   decoder
}

var (
	_ volume.Source      = (*FolderReader)(nil)
	_ volume.SliceSeeker = (*FolderReader)(nil)
)

// sliceFile is a TIFF file of a slice folder and the number that orders it.
type sliceFile struct {
	name string
	num  uint64
}

// numbers returns the runs of decimal digits in a file name without its extension
// ("stack_z0012_c1.tif" → 12, 1); ok is false when a run does not fit in a uint64.
func numbers(name string) (nums []uint64, ok bool) {
	base := strings.TrimSuffix(name, filepath.Ext(name))
	for i := 0; i < len(base); {
		if base[i] < '0' || base[i] > '9' {
			i++
			continue
		}
		j := i
		for j < len(base) && base[j] >= '0' && base[j] <= '9' {
			j++
		}
		n, err := strconv.ParseUint(base[i:j], 10, 64)
		if err != nil {
			return nil, false
		}
		nums, i = append(nums, n), j
	}
	return nums, true
}

// sliceNumbers picks the number that orders each file: the last number in its name,
// except that when every name has the same count of numbers and the last one is the
// same in all of them (a channel or camera index after the slice number, as in
// "z0012_c1.tif"), the rightmost number that differs between files.
func sliceNumbers(dir string, names []string) ([]uint64, error) {
	all := make([][]uint64, len(names))
	for i, name := range names {
		nums, ok := numbers(name)
		if ok && len(nums) == 0 && len(names) == 1 {
			nums = []uint64{0} // one slice needs no order
		}
		if !ok || len(nums) == 0 {
			return nil, fmt.Errorf("%s: no number in the file name to order the slices by", filepath.Join(dir, name))
		}
		all[i] = nums
	}
	k := len(all[0])
	pick := func(i int) int { return len(all[i]) - 1 } // the last number
	same := true
	for _, nums := range all {
		same = same && len(nums) == k
	}
	if same && len(names) > 1 {
		for j := k - 1; j >= 0; j-- {
			varies := false
			for _, nums := range all {
				varies = varies || nums[j] != all[0][j]
			}
			if varies {
				pick = func(int) int { return j }
				break
			}
		}
	}
	out := make([]uint64, len(names))
	for i := range names {
		out[i] = all[i][pick(i)]
	}
	return out, nil
}

// OpenFolder opens a folder of single-page TIFF slices (.tif or .tiff; hidden files
// are ignored). The slices are ordered by the last number in their names, compared as
// numbers, so slice_2 comes before slice_10 (or by the rightmost number that differs,
// when the last is the same in every name: z0012_c1.tif); the numbers must run without
// a gap. Every
// file's first IFD is read and checked at once: each must be one page of the same size
// and sample type as the first. The spacing comes from the first file.
func OpenFolder(dir string) (*FolderReader, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, err
	}
	var names []string
	for _, e := range ents {
		name := e.Name()
		ext := strings.ToLower(filepath.Ext(name))
		if strings.HasPrefix(name, ".") || (ext != ".tif" && ext != ".tiff") || e.IsDir() {
			continue
		}
		names = append(names, name)
	}
	if len(names) == 0 {
		return nil, fmt.Errorf("%s: no .tif or .tiff files in the folder", dir)
	}
	nums, err := sliceNumbers(dir, names)
	if err != nil {
		return nil, err
	}
	list := make([]sliceFile, len(names))
	for i, name := range names {
		list[i] = sliceFile{name, nums[i]}
	}
	slices.SortFunc(list, func(a, b sliceFile) int {
		if a.num != b.num {
			if a.num < b.num {
				return -1
			}
			return 1
		}
		return strings.Compare(a.name, b.name)
	})
	for i := 1; i < len(list); i++ {
		a, b := list[i-1], list[i]
		switch {
		case b.num == a.num:
			return nil, fmt.Errorf("%s: slice number %d also names %s", filepath.Join(dir, b.name), b.num, a.name)
		case b.num != a.num+1:
			missing := strconv.FormatUint(a.num+1, 10)
			if b.num > a.num+2 {
				missing += "–" + strconv.FormatUint(b.num-1, 10)
			}
			return nil, fmt.Errorf("%s: gap in the slice numbers: %s comes after %s, slice %s is missing", filepath.Join(dir, b.name), b.name, a.name, missing)
		}
	}
	fr := &FolderReader{dir: dir, files: make([]string, len(list))}
	for i, s := range list {
		fr.files[i] = filepath.Join(dir, s.name)
	}
	// Read every file's first IFD: cheap, and a mismatched slice fails now rather
	// than after an hour of filtering.
	for i, path := range fr.files {
		r, err := openSlice(path, &fr.dec)
		if err != nil {
			return nil, err
		}
		h := r.hdr
		r.f.Close()
		if i == 0 {
			fr.hdr = h
			fr.info = r.info
			continue
		}
		if h.NX != fr.hdr.NX || h.NY != fr.hdr.NY || h.Type != fr.hdr.Type {
			return nil, fmt.Errorf("%s: slice is %d×%d %s, but %s is %d×%d %s: every slice must have the same size and sample type",
				path, h.NX, h.NY, h.Type, filepath.Base(fr.files[0]), fr.hdr.NX, fr.hdr.NY, fr.hdr.Type)
		}
		fr.info.add(r.pages[0])
	}
	fr.hdr.NZ = len(fr.files)
	if err := fr.hdr.Validate(); err != nil {
		return nil, fmt.Errorf("%s: %w", dir, err)
	}
	fr.info.Pages, fr.info.Files = len(fr.files), len(fr.files)
	return fr, nil
}

// openSlice opens one file of a slice folder and parses its only page, sharing the
// folder's scratch buffers.
func openSlice(path string, dec *decoder) (*Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	r, err := newReader(f, true, dec)
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	r.f, r.name = f, path
	return r, nil
}

// Header returns the volume's size, sample type and spacing (from the first file).
func (fr *FolderReader) Header() volume.Header { return fr.hdr }

// Info returns how the stack is stored; Compression and Predictor list what any file
// uses, the layout is the first file's.
func (fr *FolderReader) Info() Info { return fr.info }

// Files returns the slice files in slice order.
func (fr *FolderReader) Files() []string { return slices.Clone(fr.files) }

// ReadSlice reads the next file into dst and returns io.EOF after the last one.
func (fr *FolderReader) ReadSlice(dst *volume.Slice) error {
	if fr.z >= len(fr.files) {
		return io.EOF
	}
	path := fr.files[fr.z]
	r, err := openSlice(path, &fr.dec)
	if err != nil {
		return err
	}
	defer r.f.Close()
	if h := r.hdr; h.NX != fr.hdr.NX || h.NY != fr.hdr.NY || h.Type != fr.hdr.Type {
		return fmt.Errorf("%s: slice changed since the folder was opened: now %d×%d %s", path, h.NX, h.NY, h.Type)
	}
	dst.Reset(fr.hdr.NX, fr.hdr.NY, fr.hdr.Type)
	if err := fr.dec.decodePage(r.tf, r.pages[0], dst.Data); err != nil {
		return fmt.Errorf("%s: %w", path, err)
	}
	fr.z++
	return nil
}

// SeekSlice makes the next ReadSlice read slice z (0 ≤ z ≤ NZ).
func (fr *FolderReader) SeekSlice(z int) error {
	if z < 0 || z > len(fr.files) {
		return fmt.Errorf("%s: seek to slice %d of a stack of %d", fr.dir, z, len(fr.files))
	}
	fr.z = z
	return nil
}

// Close releases the reader; no file stays open between slices.
func (fr *FolderReader) Close() error { return nil }

// A FolderWriter writes a stack as a folder of single-page TIFF files named
// z0000.tif, z0001.tif, … (zero-padded to at least four digits, more when the stack
// needs them), filled under a temporary name and renamed into place by Close. It
// implements volume.Sink.
type FolderWriter struct {
	d      *atomicfile.Dir
	enc    *pageEncoder
	h      volume.Header
	digits int
	z      int
	bw     *bufio.Writer
	err    error
	done   bool
	// pending lists slice files written since the last fsync. Each file's writeback
	// starts as soon as it is written, and they are synced in batches (and by Close
	// and Sync), which makes writing a folder several times faster than an fsync per
	// file.
	pending []string
}

var _ volume.Sink = (*FolderWriter)(nil)

// syncBatch is how many slice files FolderWriter lets wait for their fsync.
const syncBatch = 64

// CreateFolder starts writing a stack of h.NZ slices as a folder of single-page TIFF
// files at dir. Each file carries the spacing as Create's first page does.
func CreateFolder(dir string, h volume.Header, opt WriteOptions) (*FolderWriter, error) {
	enc, err := newPageEncoder(h, opt)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", dir, err)
	}
	enc.big = opt.BigTIFF || 16+enc.pageBound() > math.MaxUint32
	d, err := atomicfile.CreateDir(dir, opt.Overwrite)
	if err != nil {
		return nil, err
	}
	digits := max(4, len(strconv.Itoa(h.NZ-1)))
	return &FolderWriter{d: d, enc: enc, h: h, digits: digits, bw: bufio.NewWriterSize(nil, writeBuffer)}, nil
}

// SliceName is the file name of slice z in a folder written by CreateFolder.
func (fw *FolderWriter) SliceName(z int) string {
	return fmt.Sprintf("z%0*d.tif", fw.digits, z)
}

// WriteSlice writes the next slice as a file of its own.
func (fw *FolderWriter) WriteSlice(s *volume.Slice) error {
	if fw.err != nil {
		return fw.err
	}
	if fw.done {
		return fmt.Errorf("%s: write after Close or Abort", fw.d.Target())
	}
	if err := checkSlice(fw.h, s, fw.z); err != nil {
		return fmt.Errorf("%s: %w", fw.d.Target(), err)
	}
	if err := fw.writeFile(s); err != nil {
		fw.err = fmt.Errorf("%s: %w", filepath.Join(fw.d.Target(), fw.SliceName(fw.z)), err)
		return fw.err
	}
	fw.z++
	if len(fw.pending) >= syncBatch {
		if err := fw.syncPending(); err != nil {
			fw.err = fmt.Errorf("%s: %w", fw.d.Target(), err)
			return fw.err
		}
	}
	return nil
}

// syncPending makes the slice files written since the last call durable.
func (fw *FolderWriter) syncPending() error {
	for _, p := range fw.pending {
		f, err := os.OpenFile(p, os.O_WRONLY, 0)
		if err != nil {
			return err
		}
		if err := atomicfile.SyncFile(f); err != nil {
			return fmt.Errorf("syncing %s: %w", filepath.Base(p), err)
		}
	}
	fw.pending = fw.pending[:0]
	return nil
}

func (fw *FolderWriter) writeFile(s *volume.Slice) error {
	fw.enc.encode(s)
	path := filepath.Join(fw.d.Path, fw.SliceName(fw.z))
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o666)
	if err != nil {
		return err
	}
	fw.bw.Reset(f)
	off, err := writeHeader(fw.bw, fw.enc.big)
	var end uint64
	if err == nil {
		end, err = fw.enc.writePage(fw.bw, off, description(fw.h), true)
	}
	if err == nil {
		err = fw.bw.Flush()
	}
	if err != nil {
		f.Close()
		return err
	}
	startWriteback(f, 0, int64(end))
	fw.pending = append(fw.pending, path)
	return f.Close()
}

// Close moves the finished folder into place. If fewer slices than the header's NZ
// were written it removes everything and returns volume.ErrShortVolume.
func (fw *FolderWriter) Close() error {
	if fw.done {
		return nil
	}
	if fw.err != nil {
		fw.Abort()
		return fw.err
	}
	if fw.z < fw.h.NZ {
		fw.Abort()
		return fmt.Errorf("%s: %d of %d slices written: %w", fw.d.Target(), fw.z, fw.h.NZ, volume.ErrShortVolume)
	}
	if err := fw.syncPending(); err != nil {
		fw.Abort()
		return fmt.Errorf("%s: %w", fw.d.Target(), err)
	}
	fw.done = true
	if err := fw.d.Commit(); err != nil {
		return fmt.Errorf("%s: %w", fw.d.Target(), err)
	}
	return nil
}

// Abort removes the folder being written. It may be called more than once.
func (fw *FolderWriter) Abort() error {
	fw.done = true
	return fw.d.Abort()
}
