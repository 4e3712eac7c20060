package npy

import (
	"bufio"
	"encoding/binary"
	"fmt"
	"io"
	"math"
	"os"
	"strconv"
	"strings"
)

// A FormatError reports that the input is not a valid .npy file.
type FormatError string

func (e FormatError) Error() string { return "npy: invalid format: " + string(e) }

// An UnsupportedError reports that the input is a valid .npy file using a feature this
// package does not read (a structured or complex dtype, say).
type UnsupportedError string

func (e UnsupportedError) Error() string { return "npy: unsupported: " + string(e) }

// Magic is the 6-byte string every .npy file begins with.
const Magic = "\x93NUMPY"

// maxHeaderLen bounds the header length read from a file. Real headers describe one
// dtype and one shape and are under 200 bytes (NumPy pads them to 64 or 128); a
// larger claim is a corrupt file, not a reason to allocate.
const maxHeaderLen = 1 << 16

// An Array is an n-dimensional array of values in C order: the last index varies
// fastest. Shape is empty for a 0-d array (one value).
type Array struct {
	Shape []int
	Data  []float64
}

// Len returns the number of elements the shape holds.
func (a *Array) Len() int {
	n := 1
	for _, d := range a.Shape {
		n *= d
	}
	return n
}

// A Header is the parsed header of a .npy file.
type Header struct {
	Major, Minor int    // format version: 1.0, 2.0 or 3.0
	Descr        string // the dtype, as NumPy's descr string, e.g. "<f8"
	FortranOrder bool   // true if the data are stored first index fastest
	Shape        []int
	DataOffset   int64 // bytes from the start of the file to the first element

	kind  byte // 'f', 'i', 'u' or 'b'
	size  int  // bytes per element
	order binary.ByteOrder
}

// ElemSize is the number of bytes of one stored element.
func (h *Header) ElemSize() int { return h.size }

// Len returns the number of elements in the array. The product of the dimensions was
// checked for overflow when the header was read.
func (h *Header) Len() int {
	n := 1
	for _, d := range h.Shape {
		n *= d
	}
	return n
}

// DataSize is the number of bytes of array data that follow the header.
func (h *Header) DataSize() int64 { return int64(h.Len()) * int64(h.size) }

// ReadHeader reads the magic string, the version and the header from r and leaves r
// at the first byte of the data. It validates the dtype and the shape, so that a
// header claiming more elements than an int64 byte count can hold is an error.
func ReadHeader(r io.Reader) (*Header, error) {
	var pre [8]byte
	if _, err := io.ReadFull(r, pre[:]); err != nil {
		if err == io.EOF || err == io.ErrUnexpectedEOF {
			return nil, FormatError("file too short for the .npy magic string")
		}
		return nil, err
	}
	if string(pre[:6]) != Magic {
		return nil, FormatError("not a .npy file (missing \\x93NUMPY magic string)")
	}
	h := &Header{Major: int(pre[6]), Minor: int(pre[7])}
	var hlen int
	switch h.Major {
	case 1:
		var b [2]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, unexpected(err, "header length")
		}
		hlen = int(binary.LittleEndian.Uint16(b[:]))
		h.DataOffset = 10 + int64(hlen)
	case 2, 3:
		var b [4]byte
		if _, err := io.ReadFull(r, b[:]); err != nil {
			return nil, unexpected(err, "header length")
		}
		n := binary.LittleEndian.Uint32(b[:])
		if n > maxHeaderLen {
			return nil, FormatError(fmt.Sprintf("header length %d bytes is implausibly large", n))
		}
		hlen = int(n)
		h.DataOffset = 12 + int64(hlen)
	default:
		return nil, UnsupportedError(fmt.Sprintf("format version %d.%d", h.Major, h.Minor))
	}
	if h.Minor != 0 {
		return nil, UnsupportedError(fmt.Sprintf("format version %d.%d", h.Major, h.Minor))
	}
	hdr := make([]byte, hlen)
	if _, err := io.ReadFull(r, hdr); err != nil {
		return nil, unexpected(err, "header")
	}
	if err := h.parse(string(hdr)); err != nil {
		return nil, err
	}
	return h, nil
}

func unexpected(err error, what string) error {
	if err == io.EOF || err == io.ErrUnexpectedEOF {
		return FormatError("file ends inside the " + what)
	}
	return err
}

// parse fills h from the header text, a Python dict literal.
func (h *Header) parse(text string) error {
	if !strings.HasSuffix(text, "\n") {
		return FormatError("header does not end with a newline")
	}
	p := &dictParser{s: text}
	d, err := p.dict()
	if err != nil {
		return err
	}
	p.space()
	if p.i != len(p.s) {
		return FormatError(fmt.Sprintf("unexpected %q after the header dict", p.rest()))
	}
	var seen [3]bool
	for _, kv := range d {
		switch kv.key {
		case "descr":
			s, ok := kv.val.(string)
			if !ok {
				if _, isList := kv.val.([]any); isList {
					return UnsupportedError("structured dtype (a list of fields)")
				}
				return FormatError("'descr' is not a string")
			}
			h.Descr = s
			seen[0] = true
		case "fortran_order":
			b, ok := kv.val.(bool)
			if !ok {
				return FormatError("'fortran_order' is not True or False")
			}
			h.FortranOrder = b
			seen[1] = true
		case "shape":
			t, ok := kv.val.(tuple)
			if !ok {
				return FormatError("'shape' is not a tuple of integers")
			}
			h.Shape = []int(t)
			seen[2] = true
		default:
			return FormatError(fmt.Sprintf("unexpected key %q in the header", kv.key))
		}
	}
	if !seen[0] || !seen[1] || !seen[2] {
		return FormatError("header lacks one of 'descr', 'fortran_order', 'shape'")
	}
	if err := h.parseDescr(); err != nil {
		return err
	}
	// The element count and the byte count must fit in an int64; anything near that
	// is refused later against the file size.
	const limit = math.MaxInt64 / 16
	n := int64(1)
	for _, d := range h.Shape {
		if d < 0 {
			return FormatError(fmt.Sprintf("negative dimension %d in shape", d))
		}
		if d != 0 && n > limit/int64(d) {
			return FormatError(fmt.Sprintf("shape %v holds too many elements", h.Shape))
		}
		n *= int64(d)
	}
	if n > int64(math.MaxInt)/int64(h.size) {
		return FormatError(fmt.Sprintf("shape %v holds too many elements", h.Shape))
	}
	return nil
}

// parseDescr decodes the dtype string: a byte-order character, a kind and a size.
func (h *Header) parseDescr() error {
	d := h.Descr
	if len(d) < 3 {
		return UnsupportedError(fmt.Sprintf("dtype %q", d))
	}
	size, err := strconv.Atoi(d[2:])
	if err != nil {
		return UnsupportedError(fmt.Sprintf("dtype %q", d))
	}
	h.kind, h.size = d[1], size
	switch d[0] {
	case '<', '=':
		// '=' is native order; NumPy writes '<' or '>' explicitly, so '=' only
		// appears in hand-made files, read here as little-endian.
		h.order = binary.LittleEndian
	case '>':
		h.order = binary.BigEndian
	case '|':
		if size != 1 {
			return FormatError(fmt.Sprintf("dtype %q: '|' (no byte order) with %d-byte elements", d, size))
		}
		h.order = binary.LittleEndian
	default:
		return UnsupportedError(fmt.Sprintf("dtype %q", d))
	}
	ok := false
	switch h.kind {
	case 'f':
		ok = size == 2 || size == 4 || size == 8
	case 'i', 'u':
		ok = size == 1 || size == 2 || size == 4 || size == 8
	case 'b':
		ok = size == 1
	}
	if !ok {
		return UnsupportedError(fmt.Sprintf("dtype %q (want float16, float32, float64, an integer or bool)", d))
	}
	return nil
}

// Read reads a whole .npy file from r and returns its values as float64 in C order.
// The data are read in bounded chunks, so a header that claims more data than r
// holds fails with a FormatError after reading what is there, without allocating
// the claimed size.
func Read(r io.Reader) (*Array, error) {
	br := bufio.NewReader(r)
	h, err := ReadHeader(br)
	if err != nil {
		return nil, err
	}
	return ReadData(br, h)
}

// ReadFile reads the .npy file name. It compares the size the header claims with the
// file's size before reading the data.
func ReadFile(name string) (*Array, error) {
	f, err := os.Open(name)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	br := bufio.NewReader(f)
	h, err := ReadHeader(br)
	if err != nil {
		return nil, err
	}
	if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
		if err := h.CheckSize(st.Size()); err != nil {
			return nil, err
		}
	}
	return ReadData(br, h)
}

// CheckSize returns a FormatError if a file of fileSize bytes is too short for the
// data the header claims.
func (h *Header) CheckSize(fileSize int64) error {
	if have := fileSize - h.DataOffset; have < h.DataSize() {
		return FormatError(fmt.Sprintf("shape %v of %s needs %d data bytes, file has %d",
			h.Shape, h.Descr, h.DataSize(), max(have, 0)))
	}
	return nil
}

// chunkElems is how many elements ReadData decodes per read: large enough to amortise
// the call, small enough that a lying header costs at most this much memory up front.
const chunkElems = 1 << 16

// ReadData reads the array data described by h from r, which must be positioned at the
// first data byte (as ReadHeader leaves it), and returns them as float64 in C order.
func ReadData(r io.Reader, h *Header) (*Array, error) {
	n := h.Len()
	data := make([]float64, 0, min(n, chunkElems))
	buf := make([]byte, min(n, chunkElems)*h.size)
	for len(data) < n {
		m := min(n-len(data), chunkElems)
		b := buf[:m*h.size]
		if _, err := io.ReadFull(r, b); err != nil {
			if err == io.EOF || err == io.ErrUnexpectedEOF {
				return nil, FormatError(fmt.Sprintf("data end after %d of %d elements", len(data), n))
			}
			return nil, err
		}
		data = h.decode(data, b)
	}
	a := &Array{Shape: append([]int{}, h.Shape...), Data: data}
	if h.FortranOrder && len(h.Shape) > 1 {
		a.Data = fortranToC(data, h.Shape)
	}
	return a, nil
}

// decode appends the elements in b to dst as float64.
func (h *Header) decode(dst []float64, b []byte) []float64 {
	o := h.order
	switch {
	case h.kind == 'f' && h.size == 8:
		for i := 0; i+8 <= len(b); i += 8 {
			dst = append(dst, math.Float64frombits(o.Uint64(b[i:])))
		}
	case h.kind == 'f' && h.size == 4:
		for i := 0; i+4 <= len(b); i += 4 {
			dst = append(dst, float64(math.Float32frombits(o.Uint32(b[i:]))))
		}
	case h.kind == 'f' && h.size == 2:
		for i := 0; i+2 <= len(b); i += 2 {
			dst = append(dst, halfToFloat64(o.Uint16(b[i:])))
		}
	case h.kind == 'i' && h.size == 1:
		for _, v := range b {
			dst = append(dst, float64(int8(v)))
		}
	case h.kind == 'i' && h.size == 2:
		for i := 0; i+2 <= len(b); i += 2 {
			dst = append(dst, float64(int16(o.Uint16(b[i:]))))
		}
	case h.kind == 'i' && h.size == 4:
		for i := 0; i+4 <= len(b); i += 4 {
			dst = append(dst, float64(int32(o.Uint32(b[i:]))))
		}
	case h.kind == 'i' && h.size == 8:
		for i := 0; i+8 <= len(b); i += 8 {
			dst = append(dst, float64(int64(o.Uint64(b[i:]))))
		}
	case h.kind == 'u' && h.size == 1:
		for _, v := range b {
			dst = append(dst, float64(v))
		}
	case h.kind == 'u' && h.size == 2:
		for i := 0; i+2 <= len(b); i += 2 {
			dst = append(dst, float64(o.Uint16(b[i:])))
		}
	case h.kind == 'u' && h.size == 4:
		for i := 0; i+4 <= len(b); i += 4 {
			dst = append(dst, float64(o.Uint32(b[i:])))
		}
	case h.kind == 'u' && h.size == 8:
		for i := 0; i+8 <= len(b); i += 8 {
			dst = append(dst, float64(o.Uint64(b[i:])))
		}
	case h.kind == 'b':
		for _, v := range b {
			if v != 0 {
				dst = append(dst, 1)
			} else {
				dst = append(dst, 0)
			}
		}
	default:
		panic("npy: decode with an unchecked dtype") // parseDescr admits no other
	}
	return dst
}

// halfToFloat64 converts an IEEE 754 binary16 value (NumPy's float16) exactly.
func halfToFloat64(h uint16) float64 {
	sign := 1.0
	if h&0x8000 != 0 {
		sign = -1
	}
	exp := int(h>>10) & 0x1f
	frac := float64(h & 0x3ff)
	switch exp {
	case 0: // zero or subnormal: frac·2⁻²⁴
		return sign * math.Ldexp(frac, -24)
	case 0x1f:
		if frac != 0 {
			return math.NaN()
		}
		return sign * math.Inf(1)
	}
	return sign * math.Ldexp(1024+frac, exp-25) // (1 + frac/1024)·2^(exp−15)
}

// fortranToC reorders data stored first index fastest into last index fastest.
func fortranToC(f []float64, shape []int) []float64 {
	k := len(shape)
	stride := make([]int, k) // C-order strides
	stride[k-1] = 1
	for i := k - 2; i >= 0; i-- {
		stride[i] = stride[i+1] * shape[i+1]
	}
	c := make([]float64, len(f))
	idx := make([]int, k)
	ci := 0
	for _, v := range f {
		c[ci] = v
		// Advance the Fortran-order counter: first index fastest.
		for a := range k {
			idx[a]++
			ci += stride[a]
			if idx[a] < shape[a] {
				break
			}
			ci -= idx[a] * stride[a]
			idx[a] = 0
		}
	}
	return c
}

// The header dict parser: just enough Python literal syntax for .npy headers.

type keyVal struct {
	key string
	val any // string, bool, tuple, or []any for a list
}

type tuple []int

type dictParser struct {
	s string
	i int
}

func (p *dictParser) rest() string {
	r := p.s[p.i:]
	if len(r) > 20 {
		r = r[:20] + "…"
	}
	return r
}

func (p *dictParser) space() {
	for p.i < len(p.s) && strings.IndexByte(" \t\r\n", p.s[p.i]) >= 0 {
		p.i++
	}
}

func (p *dictParser) expect(c byte) error {
	p.space()
	if p.i >= len(p.s) || p.s[p.i] != c {
		return FormatError(fmt.Sprintf("header: want %q at %q", c, p.rest()))
	}
	p.i++
	return nil
}

// peek returns the next non-space byte, or 0 at the end.
func (p *dictParser) peek() byte {
	p.space()
	if p.i >= len(p.s) {
		return 0
	}
	return p.s[p.i]
}

func (p *dictParser) dict() ([]keyVal, error) {
	if err := p.expect('{'); err != nil {
		return nil, err
	}
	var d []keyVal
	for {
		if p.peek() == '}' {
			p.i++
			return d, nil
		}
		k, err := p.str()
		if err != nil {
			return nil, err
		}
		for _, kv := range d {
			if kv.key == k {
				return nil, FormatError(fmt.Sprintf("header: key %q given twice", k))
			}
		}
		if err := p.expect(':'); err != nil {
			return nil, err
		}
		v, err := p.value(0)
		if err != nil {
			return nil, err
		}
		d = append(d, keyVal{k, v})
		switch p.peek() {
		case ',':
			p.i++
		case '}':
		default:
			return nil, FormatError(fmt.Sprintf("header: want ',' or '}' at %q", p.rest()))
		}
	}
}

func (p *dictParser) str() (string, error) {
	q := p.peek()
	if q != '\'' && q != '"' {
		return "", FormatError(fmt.Sprintf("header: want a quoted string at %q", p.rest()))
	}
	p.i++
	start := p.i
	for p.i < len(p.s) && p.s[p.i] != q {
		if p.s[p.i] == '\\' || p.s[p.i] == '\n' {
			return "", FormatError("header: escapes and newlines in strings are not used by .npy")
		}
		p.i++
	}
	if p.i >= len(p.s) {
		return "", FormatError("header: unterminated string")
	}
	s := p.s[start:p.i]
	p.i++
	return s, nil
}

// maxDepth bounds nesting of lists and tuples (structured dtypes nest a little).
const maxDepth = 8

func (p *dictParser) value(depth int) (any, error) {
	if depth > maxDepth {
		return nil, FormatError("header: nested too deeply")
	}
	switch c := p.peek(); {
	case c == '\'' || c == '"':
		return p.str()
	case c == '(':
		return p.tupleOrNested(depth)
	case c == '[':
		return p.list(depth)
	case strings.HasPrefix(p.s[p.i:], "True"):
		p.i += 4
		return true, nil
	case strings.HasPrefix(p.s[p.i:], "False"):
		p.i += 5
		return false, nil
	case c == '-' || (c >= '0' && c <= '9'):
		return p.integer()
	}
	return nil, FormatError(fmt.Sprintf("header: unexpected %q", p.rest()))
}

func (p *dictParser) integer() (int, error) {
	p.space()
	start := p.i
	if p.i < len(p.s) && p.s[p.i] == '-' {
		p.i++
	}
	for p.i < len(p.s) && p.s[p.i] >= '0' && p.s[p.i] <= '9' {
		p.i++
	}
	v, err := strconv.Atoi(p.s[start:p.i])
	if err != nil {
		return 0, FormatError(fmt.Sprintf("header: bad integer %q", p.s[start:p.i]))
	}
	// Python 2 wrote long integers with an L suffix: (3L, 4L).
	if p.i < len(p.s) && p.s[p.i] == 'L' {
		p.i++
	}
	return v, nil
}

// tupleOrNested reads a tuple; a tuple of integers becomes a tuple value, any other
// (part of a structured dtype) a []any.
func (p *dictParser) tupleOrNested(depth int) (any, error) {
	p.i++ // '('
	var items []any
	allInt := true
	for {
		if p.peek() == ')' {
			p.i++
			break
		}
		v, err := p.value(depth + 1)
		if err != nil {
			return nil, err
		}
		if _, ok := v.(int); !ok {
			allInt = false
		}
		items = append(items, v)
		switch p.peek() {
		case ',':
			p.i++
		case ')':
		default:
			return nil, FormatError(fmt.Sprintf("header: want ',' or ')' at %q", p.rest()))
		}
	}
	if !allInt {
		return items, nil
	}
	t := make(tuple, len(items))
	for i, v := range items {
		t[i] = v.(int)
	}
	return t, nil
}

func (p *dictParser) list(depth int) (any, error) {
	p.i++ // '['
	var items []any
	for {
		if p.peek() == ']' {
			p.i++
			return items, nil
		}
		v, err := p.value(depth + 1)
		if err != nil {
			return nil, err
		}
		items = append(items, v)
		switch p.peek() {
		case ',':
			p.i++
		case ']':
		default:
			return nil, FormatError(fmt.Sprintf("header: want ',' or ']' at %q", p.rest()))
		}
	}
}
