package volume

import (
	"fmt"
	"io"
)

// MemSource is a volume held in memory as float32 values (x fastest, then y, then z),
// served slice by slice in its header's sample type. It is meant for tests, benchmarks
// and small volumes built in code; it implements Source and SliceSeeker.
type MemSource struct {
	*GenSource // header, position, SeekSlice and Close
	data       []float32
}

var (
	_ Source      = (*MemSource)(nil)
	_ SliceSeeker = (*MemSource)(nil)
)

// NewMemSource returns a source reading data as a volume described by h. Values are
// converted to h.Type as FromFloat32 does (rounding and clamping for integer types).
// It panics if h is invalid or data does not hold h.Voxels() values.
func NewMemSource(h Header, data []float32) *MemSource {
	if err := h.Validate(); err != nil {
		panic("volume: NewMemSource: " + err.Error())
	}
	if int64(len(data)) != h.Voxels() {
		panic(fmt.Sprintf("volume: NewMemSource: %d values for %d×%d×%d voxels", len(data), h.NX, h.NY, h.NZ))
	}
	return &MemSource{GenSource: &GenSource{h: h}, data: data}
}

// ReadSlice fills dst with the next slice, or returns io.EOF after the last.
func (m *MemSource) ReadSlice(dst *Slice) error {
	n := m.h.SliceLen()
	return m.next(dst, func() []float32 { return m.data[m.z*n : (m.z+1)*n] })
}

// GenSource synthesises a volume slice by slice: slice z is whatever its function writes
// for z. It holds one slice of float32 values however deep the volume is, which makes it
// the source of memory tests and benchmarks on stacks that exist in no file. It
// implements Source and SliceSeeker.
type GenSource struct {
	h   Header
	gen func(z int, dst []float32)
	buf []float32
	z   int
}

var (
	_ Source      = (*GenSource)(nil)
	_ SliceSeeker = (*GenSource)(nil)
)

// NewGenSource returns a source whose slice z is made by gen(z, dst), which must fill
// all h.NX·h.NY values of dst (x fastest). Values are converted to h.Type as
// FromFloat32 does. It panics if h is invalid.
func NewGenSource(h Header, gen func(z int, dst []float32)) *GenSource {
	if err := h.Validate(); err != nil {
		panic("volume: NewGenSource: " + err.Error())
	}
	return &GenSource{h: h, gen: gen, buf: make([]float32, h.SliceLen())}
}

// Header returns the volume's header.
func (g *GenSource) Header() Header { return g.h }

// ReadSlice fills dst with the next slice, or returns io.EOF after the last.
func (g *GenSource) ReadSlice(dst *Slice) error {
	return g.next(dst, func() []float32 {
		g.gen(g.z, g.buf)
		return g.buf
	})
}

// next encodes the values that slice returns for the current slice into dst and moves
// on, or returns io.EOF after the last slice.
func (g *GenSource) next(dst *Slice, slice func() []float32) error {
	if g.z >= g.h.NZ {
		return io.EOF
	}
	dst.Reset(g.h.NX, g.h.NY, g.h.Type)
	encodeFloat32(dst, slice())
	g.z++
	return nil
}

// SeekSlice makes slice z the next one ReadSlice returns (z = NZ means the end).
func (g *GenSource) SeekSlice(z int) error {
	if z < 0 || z > g.h.NZ {
		return fmt.Errorf("seek to slice %d of %d", z, g.h.NZ)
	}
	g.z = z
	return nil
}

// Close does nothing.
func (g *GenSource) Close() error { return nil }

// MemSink collects the slices written to it, decoded to float32 and appended to Data
// (x fastest, then y, then z), or only counts them when Discard is set. The zero value
// is ready to use. It implements Sink; Close and Abort only record that they were
// called.
type MemSink struct {
	Discard bool      // count slices but keep no values (for benchmarks)
	Data    []float32 // the values written, when Discard is false
	Slices  int       // slices written
	NX, NY  int       // size of the slices written
	Type    SampleType
	Closed  bool
	Aborted bool
}

var _ Sink = (*MemSink)(nil)

// WriteSlice appends src to the sink. Every slice must have the size and type of the
// first.
func (s *MemSink) WriteSlice(src *Slice) error {
	if s.Slices == 0 {
		s.NX, s.NY, s.Type = src.NX, src.NY, src.Type
	} else if src.NX != s.NX || src.NY != s.NY || src.Type != s.Type {
		return fmt.Errorf("slice of %d×%d %v after slices of %d×%d %v", src.NX, src.NY, src.Type, s.NX, s.NY, s.Type)
	}
	if !s.Discard {
		n := len(s.Data)
		s.Data = append(s.Data, make([]float32, src.Len())...)
		src.ToFloat32(s.Data[n:])
	}
	s.Slices++
	return nil
}

// Close records that the sink was committed.
func (s *MemSink) Close() error { s.Closed = true; return nil }

// Abort records that the sink was discarded.
func (s *MemSink) Abort() error { s.Aborted = true; return nil }

// encodeFloat32 is dst.FromFloat32(src), with a plain copy for float32 slices.
func encodeFloat32(dst *Slice, src []float32) {
	if dst.Type == Float32 {
		putF32LE(dst.Data, src)
		return
	}
	dst.FromFloat32(src)
}
