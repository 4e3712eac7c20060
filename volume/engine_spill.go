package volume

import (
	"fmt"
	"io"
	"os"
)

// spill is a temporary copy of a source that cannot seek, read back with ReadAt. Filter
// makes one only for periodic edges along z, which need the last slices before the first
// output can be formed; the copy costs disk space, never memory.
type spill struct {
	f   *os.File
	h   Header
	pos int
}

func newSpill(src Source, dir string) (*spill, error) {
	h := src.Header()
	f, err := os.CreateTemp(dir, "tripass-spill-*.raw")
	if err != nil {
		return nil, fmt.Errorf("periodic edges: temporary copy of the input: %w", err)
	}
	sp := &spill{f: f, h: h}
	s := NewSlice(h.NX, h.NY, h.Type)
	for z := 0; z < h.NZ; z++ {
		if err := src.ReadSlice(s); err != nil {
			if err == io.EOF {
				err = io.ErrUnexpectedEOF
			}
			sp.Close()
			return nil, fmt.Errorf("reading slice %d: %w", z, err)
		}
		if s.NX != h.NX || s.NY != h.NY || s.Type != h.Type {
			sp.Close()
			return nil, fmt.Errorf("reading slice %d: slice of %d×%d %v, header says %d×%d %v", z, s.NX, s.NY, s.Type, h.NX, h.NY, h.Type)
		}
		if _, err := f.Write(s.Data); err != nil {
			sp.Close()
			return nil, fmt.Errorf("periodic edges: temporary copy of the input: %w", err)
		}
	}
	return sp, nil
}

func (sp *spill) Header() Header { return sp.h }

func (sp *spill) ReadSlice(dst *Slice) error {
	if sp.pos >= sp.h.NZ {
		return io.EOF
	}
	dst.Reset(sp.h.NX, sp.h.NY, sp.h.Type)
	if _, err := sp.f.ReadAt(dst.Data, int64(sp.pos)*int64(len(dst.Data))); err != nil {
		return fmt.Errorf("temporary copy: %w", err)
	}
	sp.pos++
	return nil
}

func (sp *spill) SeekSlice(z int) error {
	if z < 0 || z > sp.h.NZ {
		return fmt.Errorf("slice %d out of range", z)
	}
	sp.pos = z
	return nil
}

// Close removes the temporary file.
func (sp *spill) Close() error {
	err := sp.f.Close()
	if rerr := os.Remove(sp.f.Name()); err == nil {
		err = rerr
	}
	return err
}
