package volume

import (
	"errors"
	"fmt"
	"io"

	"github.com/tripass/tripass/tensor"
)

// Halo returns how many slices beyond an output range [z0, z1) the plans read along z:
// before is the number of slices below z0, after the number above z1.
func Halo(plans []*tensor.Plan) (before, after int) {
	for _, p := range plans {
		kz := p.Kernel.K
		c := tensor.Center(kz)
		// out(z) = Σ_j K(j)·f(z + c − j), j in [0, kz): it reads f from z + c − (kz−1)
		// to z + c.
		before = max(before, kz-1-c)
		after = max(after, c)
	}
	return before, after
}

// ErrPeriodicNeedsSeek is returned by FilterRange for periodic edges on a range whose
// halo wraps around the stack, when the source cannot seek.
var ErrPeriodicNeedsSeek = errors.New("periodic edges on part of a stack need an input that can seek")

// FilterRange is Filter restricted to output slices [z0, z1): it writes exactly those
// slices to dst, in order, bit for bit equal to the same slices of a whole run with the
// same plans and options (whatever the thread count), and reads from src only the slices
// they need — the range and the kernels' halo — seeking past the others when src
// implements SliceSeeker and reading through them otherwise. Shards of one job and
// resumed runs are built on it.
//
// How: the engine runs on a window of the input. A window face that lies inside the
// volume sits at least a halo away from every output kept, so what the engine does
// there does not matter; a face that is the volume's own face gets the engine's own edge
// handling, exactly as in a whole run. Periodic edges need slices from the other end of
// the stack: the window lists them in their wrapped order.
func FilterRange(dst SliceWriter, src Source, outType SampleType, plans []*tensor.Plan, combine Combine, opt FilterOptions, z0, z1 int) (FilterStats, error) {
	h := src.Header()
	if z0 < 0 || z1 > h.NZ || z0 >= z1 {
		return FilterStats{}, fmt.Errorf("output range [%d, %d) is not inside [0, %d)", z0, z1, h.NZ)
	}
	if z0 == 0 && z1 == h.NZ {
		return Filter(dst, src, outType, plans, combine, opt)
	}
	before, after := Halo(plans)
	var idx []int // input slice of each window slice
	skip := 0     // window slices before the first kept output
	if opt.Edge == EdgePeriodic {
		// The wrapped order gives the window its true neighbours; its faces are never
		// the volume's, and no kept output reaches them. Reading the wrapped order
		// needs seeking (every file format tripass reads can).
		lo, hi := z0-before, z1+after
		if _, ok := src.(SliceSeeker); !ok && (lo < 0 || hi > h.NZ) {
			return FilterStats{}, ErrPeriodicNeedsSeek
		}
		for z := lo; z < hi; z++ {
			idx = append(idx, ((z%h.NZ)+h.NZ)%h.NZ)
		}
		skip = before
	} else {
		// The window is the span of every slice a kept output reads, after the edge
		// rule. A kept output that reads past a volume face finds that face in the
		// window too, at the window's own face, where the engine applies the same rule.
		lo, hi := h.NZ, -1
		for z := z0; z < z1; z++ {
			if z-before >= 0 && z+after < h.NZ && z != z0 && z != z1-1 {
				continue // interior outputs widen nothing beyond the two ends
			}
			for d := -before; d <= after; d++ {
				if j, ok := opt.Edge.Index(z+d, h.NZ); ok {
					lo, hi = min(lo, j), max(hi, j)
				}
			}
		}
		lo, hi = min(lo, z0), max(hi, z1-1)
		for z := lo; z <= hi; z++ {
			idx = append(idx, z)
		}
		skip = z0 - lo
	}
	win := &windowSource{src: src, idx: idx, h: h}
	win.h.NZ = len(idx)
	keep := &rangeWriter{dst: dst, skip: skip, n: z1 - z0}
	if opt.Progress != nil {
		progress := opt.Progress
		keep.progress = func(done int) { progress(done, z1-z0) }
		opt.Progress = nil
	}
	var in Source = win
	if _, ok := src.(SliceSeeker); !ok {
		in = plainWindow{win} // the engine must not try to seek a window it cannot
	}
	st, err := Filter(keep, in, outType, plans, combine, opt)
	st.Slices = keep.written
	return st, err
}

// windowSource presents the input slices listed in idx as a volume of len(idx) slices.
type windowSource struct {
	src  Source
	idx  []int
	h    Header
	next int // next window slice
	pos  int // the source's position: the input slice its next ReadSlice returns
	tmp  Slice
}

func (w *windowSource) Header() Header { return w.h }
func (w *windowSource) Close() error   { return nil }

func (w *windowSource) ReadSlice(dst *Slice) error {
	if w.next >= len(w.idx) {
		return io.EOF
	}
	z := w.idx[w.next]
	if z != w.pos {
		if s, ok := w.src.(SliceSeeker); ok {
			if err := s.SeekSlice(z); err != nil {
				return fmt.Errorf("seeking to slice %d: %w", z, err)
			}
			w.pos = z
		} else if z < w.pos {
			return fmt.Errorf("slice %d is needed again but the input cannot seek", z)
		}
		for w.pos < z {
			if err := w.src.ReadSlice(&w.tmp); err != nil {
				if err == io.EOF {
					err = io.ErrUnexpectedEOF
				}
				return fmt.Errorf("skipping slice %d: %w", w.pos, err)
			}
			w.pos++
		}
	}
	if err := w.src.ReadSlice(dst); err != nil {
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		return err
	}
	w.pos++
	w.next++
	return nil
}

// SeekSlice lets the engine seek within the window (it does for periodic edges).
func (w *windowSource) SeekSlice(z int) error {
	if z < 0 || z > len(w.idx) {
		return fmt.Errorf("window slice %d out of range", z)
	}
	if _, ok := w.src.(SliceSeeker); !ok && z < w.next {
		return fmt.Errorf("the input cannot seek back to slice %d", w.idx[z])
	}
	w.next = z
	return nil
}

// plainWindow hides windowSource's SeekSlice when the input cannot seek.
type plainWindow struct{ w *windowSource }

func (p plainWindow) Header() Header             { return p.w.Header() }
func (p plainWindow) ReadSlice(dst *Slice) error { return p.w.ReadSlice(dst) }
func (p plainWindow) Close() error               { return nil }

// rangeWriter drops the first skip slices, passes on the next n and drops the rest.
type rangeWriter struct {
	dst      SliceWriter
	skip, n  int
	seen     int
	written  int
	progress func(done int)
}

func (r *rangeWriter) WriteSlice(s *Slice) error {
	i := r.seen
	r.seen++
	if i < r.skip || i >= r.skip+r.n {
		return nil
	}
	if err := r.dst.WriteSlice(s); err != nil {
		return err
	}
	r.written++
	if r.progress != nil {
		r.progress(r.written)
	}
	return nil
}

// CopyRange is Copy restricted to slices [z0, z1) of src: it seeks to z0 when src
// implements SliceSeeker (and reads through the slices before it otherwise), then
// copies z1−z0 slices converted to t. progress gets the number of slices copied.
func CopyRange(dst SliceWriter, src Source, t SampleType, z0, z1 int, progress func(done int)) (clamped int64, err error) {
	h := src.Header()
	if z0 < 0 || z1 > h.NZ || z0 >= z1 {
		return 0, fmt.Errorf("slice range [%d, %d) is not inside [0, %d)", z0, z1, h.NZ)
	}
	win := &windowSource{src: src, h: h}
	for z := z0; z < z1; z++ {
		win.idx = append(win.idx, z)
	}
	win.h.NZ = len(win.idx)
	return Copy(dst, win, t, progress)
}
