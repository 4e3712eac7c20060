package volume

import (
	"fmt"
	"io"
	"math"
)

// The engine's reader and writer stages.

// reader reads the input slices in the order of the schedule, decodes and extends them.
func (e *engine) reader(src Source) {
	defer e.rwg.Done()
	raw := NewSlice(e.nx, e.ny, e.h.Type)
	type span struct{ from, to int }
	spans := []span{{0, e.nz}}
	if e.nTail > 0 {
		spans = []span{{e.nz - e.nTail, e.nz}, {0, e.nz - e.nTail}}
	}
	pos := 0
	for _, sp := range spans {
		var b *inBuf
		if sp.from != pos {
			if err := e.seeker.SeekSlice(sp.from); err != nil {
				select {
				case b = <-e.inFree:
				case <-e.quit:
					return
				}
				b.err = fmt.Errorf("seeking to slice %d: %w", sp.from, err)
				select {
				case e.inCh <- b:
				case <-e.quit:
				}
				return
			}
		}
		for i := sp.from; i < sp.to; i++ {
			select {
			case b = <-e.inFree:
			case <-e.quit:
				return
			}
			b.idx, b.err = i, nil
			err := src.ReadSlice(raw)
			if err == nil && (raw.NX != e.nx || raw.NY != e.ny || raw.Type != e.h.Type) {
				err = fmt.Errorf("slice of %d×%d %v, header says %d×%d %v", raw.NX, raw.NY, raw.Type, e.nx, e.ny, e.h.Type)
			}
			if err != nil {
				if err == io.EOF {
					err = io.ErrUnexpectedEOF
				}
				b.err = fmt.Errorf("reading slice %d: %w", i, err)
			} else {
				e.decode(raw, b)
			}
			select {
			case e.inCh <- b:
			case <-e.quit:
				return
			}
			if b.err != nil {
				return
			}
		}
		pos = sp.to
	}
}

// decode converts raw into b's float32 layout and extends it along x (and y).
func (e *engine) decode(raw *Slice, b *inBuf) {
	S, nx := e.S, e.nx
	d := b.data
	rb := nx * raw.Type.Size()
	isFloat := raw.Type.IsFloat()
	b.nan, b.inf = 0, 0
	for y := 0; y < e.ny; y++ {
		line := d[(y+e.padT)*S : (y+e.padT+1)*S]
		vals := line[e.padL : e.padL+nx]
		if raw.Type == Float32 {
			f32LE(vals, raw.Data[y*rb:(y+1)*rb])
			// NaN and ±Inf are the values whose exponent bits are all ones.
			for _, v := range vals {
				if u := math.Float32bits(v); u&0x7f800000 == 0x7f800000 {
					if u&0x007fffff != 0 {
						b.nan++
					} else {
						b.inf++
					}
				}
			}
		} else {
			row := Slice{NX: nx, NY: 1, Type: raw.Type, Data: raw.Data[y*rb : (y+1)*rb]}
			row.ToFloat32(vals)
		}
		if isFloat && raw.Type != Float32 {
			for _, v := range vals {
				// NaN and ±Inf are the values whose exponent bits are all ones.
				if math.Float32bits(v)&0x7f800000 == 0x7f800000 {
					if v != v {
						b.nan++
					} else {
						b.inf++
					}
				}
			}
		}
		for p, j := range e.left {
			if j < 0 {
				line[p] = e.fill
			} else {
				line[p] = vals[j]
			}
		}
		right := line[e.padL+nx:]
		for p, j := range e.right {
			if j < 0 {
				right[p] = e.fill
			} else {
				right[p] = vals[j]
			}
		}
	}
	fillRow := func(r, j int) {
		line := d[r*S : (r+1)*S]
		if j < 0 {
			for i := range line {
				line[i] = e.fill
			}
		} else {
			copy(line, d[(j+e.padT)*S:(j+e.padT+1)*S])
		}
	}
	for r, j := range e.top {
		fillRow(r, j)
	}
	for r, j := range e.bot {
		fillRow(e.padT+e.ny+r, j)
	}
}

// writer converts the output slices to the output type and writes them in order.
func (e *engine) writer(dst SliceWriter) {
	defer close(e.wdone)
	t := e.outType
	s := NewSlice(e.nx, e.ny, t)
	rb := e.nx * t.Size()
	for o := range e.outCh {
		if e.werr == nil {
			var clamped int
			for y := 0; y < e.ny; y++ {
				clamped += encodeRow(s.Data[y*rb:(y+1)*rb], t, o.data[y*e.S:y*e.S+e.nx])
			}
			e.clamped += int64(clamped)
			if err := dst.WriteSlice(s); err != nil {
				e.werr = fmt.Errorf("writing slice %d: %w", o.z, err)
				e.wfailed.Store(true)
			} else {
				e.written++
				if e.progress != nil {
					e.progress(e.written, e.nz)
				}
			}
		}
		e.outFree <- o
	}
}
