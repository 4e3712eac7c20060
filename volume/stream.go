package volume

import (
	"errors"
	"fmt"
	"io"
	"math"
)

// A SliceReader yields the z-slices of a volume in order. ReadSlice fills dst (resizing
// it with Reset) with the next slice and returns io.EOF after the last one. A slice
// that cannot be read whole returns an error other than io.EOF (io.ErrUnexpectedEOF for
// a truncated file).
type SliceReader interface {
	ReadSlice(dst *Slice) error
}

// A SliceSeeker can move to slice z, so that the next ReadSlice returns slice z.
// Formats that allow it implement it; callers find it by type assertion.
type SliceSeeker interface {
	SeekSlice(z int) error
}

// A Source is an open volume read slice by slice.
type Source interface {
	SliceReader
	Header() Header
	io.Closer
}

// A SliceWriter takes the z-slices of a volume in order.
type SliceWriter interface {
	WriteSlice(src *Slice) error
}

// A Sink is a volume being written. Close commits it: the output appears under its
// final name only when Close succeeds after every slice was written. Abort discards
// whatever was written and leaves nothing under the final name; it may be called after
// a failed WriteSlice or Close, and more than once.
type Sink interface {
	SliceWriter
	Close() error
	Abort() error
}

// ErrShortVolume is returned by Close of a sink that received fewer slices than its
// header declared.
var ErrShortVolume = errors.New("fewer slices written than the header declares")

// Stats summarises a volume's values, ignoring NaNs (which are counted).
type Stats struct {
	Min, Max  float64
	Mean, Std float64
	NaN, Inf  int64
	Count     int64   // finite values
	m2        float64 // Welford's running sum of squared deviations

}

// Add folds the values of one slice into st.
func (st *Stats) Add(s *Slice) {
	n := s.Len()
	if st.Count == 0 && st.NaN == 0 && st.Inf == 0 {
		st.Min, st.Max = math.Inf(1), math.Inf(-1)
	}
	for i := 0; i < n; i++ {
		v := s.At(i)
		switch {
		case v != v:
			st.NaN++
			continue
		case math.IsInf(v, 0):
			st.Inf++
			if v < st.Min {
				st.Min = v
			}
			if v > st.Max {
				st.Max = v
			}
			continue
		}
		if v < st.Min {
			st.Min = v
		}
		if v > st.Max {
			st.Max = v
		}
		// Welford (1962), Technometrics 4(3): numerically stable running variance.
		st.Count++
		d := v - st.Mean
		st.Mean += d / float64(st.Count)
		st.m2 += d * (v - st.Mean)
	}
	if st.Count > 0 {
		st.Std = math.Sqrt(st.m2 / float64(st.Count))
	}
}

// ReadStats streams once over src and returns its statistics.
func ReadStats(src Source) (Stats, error) {
	var st Stats
	h := src.Header()
	s := NewSlice(h.NX, h.NY, h.Type)
	for z := 0; ; z++ {
		err := src.ReadSlice(s)
		if err == io.EOF {
			if z != h.NZ {
				return st, fmt.Errorf("slice %d: %w", z, io.ErrUnexpectedEOF)
			}
			break
		}
		if err != nil {
			return st, fmt.Errorf("slice %d: %w", z, err)
		}
		st.Add(s)
	}
	if st.Count == 0 && st.NaN == 0 && st.Inf == 0 {
		st.Min, st.Max = 0, 0
	}
	return st, nil
}

// Copy streams every slice of src into dst, converting to dst's sample type t with
// rounding and clamping when t differs from the source's, and returns the number of
// clamped values. It does not close either end. progress, if non-nil, is called after
// each slice with the number of slices done.
func Copy(dst SliceWriter, src Source, t SampleType, progress func(done int)) (clamped int64, err error) {
	h := src.Header()
	in := NewSlice(h.NX, h.NY, h.Type)
	out := NewSlice(h.NX, h.NY, t)
	for z := 0; z < h.NZ; z++ {
		if err := src.ReadSlice(in); err != nil {
			if err == io.EOF {
				err = io.ErrUnexpectedEOF
			}
			return clamped, fmt.Errorf("reading slice %d: %w", z, err)
		}
		w := in
		if t != h.Type {
			clamped += int64(Convert(out, in))
			w = out
		}
		if err := dst.WriteSlice(w); err != nil {
			return clamped, fmt.Errorf("writing slice %d: %w", z, err)
		}
		if progress != nil {
			progress(z + 1)
		}
	}
	return clamped, nil
}
