// Package kerneltext reads and writes tripass's plain-text kernel format, for kernels
// typed by hand, pasted from a paper or written by a short script.
//
// The format: numbers separated by spaces, tabs or commas, one row along x per line;
// consecutive rows are stacked along y, and a blank line (empty or only spaces) ends a
// z-slice. A '#' starts a comment that runs to the end of the line; a line holding only
// a comment is skipped and does not separate slices. Every row has the same number of
// values and every slice the same number of rows. For example, a 3×3×2 kernel:
//
//	# x along a row, y down the rows, z-slices separated by blank lines
//	0 1 0
//	1 2 1
//	0 1 0
//
//	0 0 0
//	0 1 0
//	0 0 0
//
// Values are parsed by strconv.ParseFloat and must be finite; Write writes the
// shortest decimal form that reads back to the same float64.
package kerneltext

import (
	"bufio"
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// Limits on a kernel read from text. A 3D kernel wider than MaxAxis taps along an axis
// is far beyond what direct or separable convolution is used for, and MaxTaps float64
// values take 128 MiB; larger inputs are refused before they are stored.
const (
	MaxAxis = 1023
	MaxTaps = 1 << 24
	// maxLine bounds one line of text: MaxAxis values of 25 characters with room to spare.
	maxLine = 1 << 20
)

// A FormatError reports a malformed kernel text, with the 1-based line it was found on
// (0 when it concerns the whole text).
type FormatError struct {
	Line int
	Msg  string
}

func (e *FormatError) Error() string {
	if e.Line > 0 {
		return fmt.Sprintf("kerneltext: line %d: %s", e.Line, e.Msg)
	}
	return "kerneltext: " + e.Msg
}

func errorf(line int, format string, a ...any) error {
	return &FormatError{Line: line, Msg: fmt.Sprintf(format, a...)}
}

// An Array is a kernel read from text: Shape is (kz, ky, kx), the last axis x as in
// NumPy's order for a stack of slices, and Data holds the values with x fastest, then
// y, then z.
type Array struct {
	Shape []int
	Data  []float64
}

// Read parses a kernel from r. The shape is always three-dimensional: a single row is
// (1, 1, kx) and a single slice (1, ky, kx).
func Read(r io.Reader) (*Array, error) {
	sc := bufio.NewScanner(r)
	sc.Buffer(make([]byte, 0, 64*1024), maxLine)
	var (
		data       []float64
		kx, ky     int // row length and rows per slice, fixed by the first row and slice
		firstRow   int // line of the first row
		rows       int // rows in the current slice
		sliceStart int // line of the current slice's first row
		slices     int // completed slices
		row        []float64
	)
	endSlice := func(line int) error {
		if rows == 0 {
			return nil
		}
		if slices == 0 {
			ky = rows
		} else if rows != ky {
			return errorf(sliceStart, "z-slice %d has %d rows, the first slice has %d", slices+1, rows, ky)
		}
		slices++
		if slices > MaxAxis {
			return errorf(line, "more than %d z-slices", MaxAxis)
		}
		rows = 0
		return nil
	}
	line := 0
	for sc.Scan() {
		line++
		text := sc.Text()
		if i := strings.IndexByte(text, '#'); i >= 0 {
			if strings.TrimSpace(text[:i]) == "" {
				continue // a comment line: neither a row nor a separator
			}
			text = text[:i]
		}
		text = strings.TrimSpace(text)
		if text == "" {
			if err := endSlice(line); err != nil {
				return nil, err
			}
			continue
		}
		var err error
		row, err = parseRow(row[:0], text, line)
		if err != nil {
			return nil, err
		}
		if kx == 0 {
			kx, firstRow = len(row), line
			if kx > MaxAxis {
				return nil, errorf(line, "row of %d values is longer than the limit of %d", kx, MaxAxis)
			}
		} else if len(row) != kx {
			return nil, errorf(line, "row has %d values, the first row (line %d) has %d", len(row), firstRow, kx)
		}
		if rows == 0 {
			sliceStart = line
		}
		rows++
		if rows > MaxAxis {
			return nil, errorf(line, "z-slice has more than %d rows", MaxAxis)
		}
		if len(data)+kx > MaxTaps {
			return nil, errorf(line, "kernel has more than %d values", MaxTaps)
		}
		data = append(data, row...)
	}
	if err := sc.Err(); err != nil {
		if errors.Is(err, bufio.ErrTooLong) {
			return nil, errorf(line+1, "line longer than %d bytes", maxLine)
		}
		return nil, err
	}
	if err := endSlice(line); err != nil {
		return nil, err
	}
	if len(data) == 0 {
		return nil, errorf(0, "no values")
	}
	return &Array{Shape: []int{slices, ky, kx}, Data: data}, nil
}

// parseRow appends the values of one line (comment removed, not blank) to dst.
func parseRow(dst []float64, text string, line int) ([]float64, error) {
	hasComma := strings.IndexByte(text, ',') >= 0
	for part := range strings.SplitSeq(text, ",") {
		fields := strings.Fields(part)
		if hasComma && len(fields) == 0 {
			return nil, errorf(line, "empty value between commas")
		}
		for _, f := range fields {
			v, err := strconv.ParseFloat(f, 64)
			if err != nil {
				return nil, errorf(line, "%q is not a number", f)
			}
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, errorf(line, "value %q is not a finite number", f)
			}
			dst = append(dst, v)
		}
	}
	return dst, nil
}

// Write writes a kernel as text, after a '#' comment giving its shape. Shape may be
// (kx), (ky, kx) or (kz, ky, kx) (the last axis is x); Data must hold its product of
// values, x fastest.
func Write(w io.Writer, a *Array) error {
	if len(a.Shape) < 1 || len(a.Shape) > 3 {
		return fmt.Errorf("kerneltext: write: shape %v is not 1-, 2- or 3-dimensional", a.Shape)
	}
	s := []int{1, 1, 1}
	copy(s[3-len(a.Shape):], a.Shape)
	kz, ky, kx := s[0], s[1], s[2]
	if kx <= 0 || ky <= 0 || kz <= 0 {
		return fmt.Errorf("kerneltext: write: shape %v has an empty axis", a.Shape)
	}
	if kx*ky*kz != len(a.Data) {
		return fmt.Errorf("kerneltext: write: shape %v holds %d values, data has %d", a.Shape, kx*ky*kz, len(a.Data))
	}
	for i, v := range a.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("kerneltext: write: value %d is %v; the format holds finite numbers only", i, v)
		}
	}
	bw := bufio.NewWriter(w)
	fmt.Fprintf(bw, "# kernel of %d×%d×%d taps (x×y×z): one row along x per line, rows along y,\n", kx, ky, kz)
	fmt.Fprintf(bw, "# z-slices separated by a blank line\n")
	var buf []byte
	n := 0
	for z := range kz {
		if z > 0 {
			bw.WriteByte('\n')
		}
		for range ky {
			buf = buf[:0]
			for x := range kx {
				if x > 0 {
					buf = append(buf, ' ')
				}
				buf = strconv.AppendFloat(buf, a.Data[n], 'g', -1, 64)
				n++
			}
			buf = append(buf, '\n')
			bw.Write(buf)
		}
	}
	return bw.Flush()
}
