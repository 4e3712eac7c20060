package npy

import (
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// align is the boundary the data start on: numpy.lib.format's ARRAY_ALIGN, 64 bytes
// in NumPy 1.24, so that files can be memory-mapped with any element alignment.
const align = 64

// growthDigits is numpy.lib.format's GROWTH_AXIS_MAX_DIGITS (21 in NumPy 1.24): the
// header is padded as if the growing axis (the first in C order) had that many digits,
// so that appending to the array can rewrite the header in place. We pad the same way
// so that our files are byte for byte what numpy.save writes.
const growthDigits = 21

// Write writes a as a little-endian float64 ('<f8'), C-order .npy file.
func Write(w io.Writer, a *Array) error { return write(w, a, false) }

// WriteFloat32 writes a as a little-endian float32 ('<f4'), C-order .npy file. Values
// are rounded to the nearest float32.
func WriteFloat32(w io.Writer, a *Array) error { return write(w, a, true) }

func write(w io.Writer, a *Array, f32 bool) error {
	n := 1
	for _, d := range a.Shape {
		if d < 0 {
			return fmt.Errorf("npy: write: negative dimension in shape %v", a.Shape)
		}
		n *= d
	}
	if n != len(a.Data) {
		return fmt.Errorf("npy: write: shape %v holds %d values, data has %d", a.Shape, n, len(a.Data))
	}
	descr := "<f8"
	if f32 {
		descr = "<f4"
	}
	if _, err := io.WriteString(w, header(descr, a.Shape)); err != nil {
		return err
	}
	const chunk = 4096
	size := 8
	if f32 {
		size = 4
	}
	buf := make([]byte, chunk*size)
	for start := 0; start < len(a.Data); start += chunk {
		vals := a.Data[start:min(start+chunk, len(a.Data))]
		b := buf[:len(vals)*size]
		if f32 {
			for i, v := range vals {
				binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(float32(v)))
			}
		} else {
			for i, v := range vals {
				binary.LittleEndian.PutUint64(b[8*i:], math.Float64bits(v))
			}
		}
		if _, err := w.Write(b); err != nil {
			return err
		}
	}
	return nil
}

// header returns the magic string, version, header length and the padded header dict,
// laid out as numpy.lib.format writes it: keys sorted, Python reprs, growth padding,
// then spaces and '\n' up to the 64-byte boundary. Version 2.0 is used only if the
// header is too long for version 1.0's uint16 length.
func header(descr string, shape []int) string {
	var sb strings.Builder
	sb.WriteString("{'descr': '" + descr + "', 'fortran_order': False, 'shape': (")
	for i, d := range shape {
		if i > 0 {
			sb.WriteString(", ")
		}
		sb.WriteString(strconv.Itoa(d))
	}
	if len(shape) == 1 {
		sb.WriteString(",")
	}
	sb.WriteString("), }")
	if len(shape) > 0 {
		sb.WriteString(strings.Repeat(" ", max(growthDigits-len(strconv.Itoa(shape[0])), 0)))
	}
	dict := sb.String()
	for _, v := range []struct {
		major  byte
		prefix int // magic, version, header length
	}{{1, 10}, {2, 12}} {
		hlen := len(dict) + 1 // with the final '\n'
		pad := align - (v.prefix+hlen)%align
		total := hlen + pad
		if v.major == 1 && total > math.MaxUint16 {
			continue
		}
		var pre []byte
		pre = append(pre, Magic...)
		pre = append(pre, v.major, 0)
		if v.major == 1 {
			pre = binary.LittleEndian.AppendUint16(pre, uint16(total))
		} else {
			pre = binary.LittleEndian.AppendUint32(pre, uint32(total))
		}
		return string(pre) + dict + strings.Repeat(" ", pad) + "\n"
	}
	panic("unreachable")
}
