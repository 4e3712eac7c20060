package nifti

import (
	"bytes"
	"encoding/binary"
	"fmt"
	"math"
	"strconv"

	"github.com/tripass/tripass/volume"
)

// Sizes and offsets of the NIfTI-1 header (nifti1.h, NIfTI Data Format Working Group;
// the same offsets as nibabel.nifti1.header_dtype, nibabel 5.0).
const (
	headerSize = 348 // sizeof_hdr
	// minVoxOffset is where data may start in a single .nii file: the header and the
	// 4-byte extension flag that follows it.
	minVoxOffset = 352
	nifti2Size   = 540 // sizeof_hdr of NIfTI-2, which tripass does not read

	offSizeofHdr = 0
	offDimInfo   = 39
	offDim       = 40 // int16[8]
	offDatatype  = 70
	offBitpix    = 72
	offPixdim    = 76 // float32[8]
	offVoxOffset = 108
	offSclSlope  = 112
	offSclInter  = 116
	offXYZTUnits = 123
	offDescrip   = 148 // char[80]
	offQformCode = 252
	offSformCode = 254
	offQuatern   = 256 // quatern_b, _c, _d
	offQOffset   = 268 // qoffset_x, _y, _z
	offSrow      = 280 // srow_x, srow_y, srow_z, each float32[4]
	offMagic     = 344
	descripLen   = 80
	offRegular   = 38
)

// Magic strings at offset 344: one file with data after the header, or a header in a
// .hdr file beside an .img (nifti1.h).
var (
	magicSingle = [4]byte{'n', '+', '1', 0}
	magicPair   = [4]byte{'n', 'i', '1', 0}
)

// A Datatype is a NIfTI-1 datatype code (nifti1.h, NIFTI_TYPE_*).
type Datatype int16

// The datatypes tripass reads. Int8 is presented as volume.Int16 (exactly: every int8
// value is an int16 value), since tripass has no 8-bit signed sample type.
const (
	Uint8   Datatype = 2
	Int16   Datatype = 4
	Int32   Datatype = 8
	Float32 Datatype = 16
	Float64 Datatype = 64
	Int8    Datatype = 256
	Uint16  Datatype = 512
	Uint32  Datatype = 768
)

// Other datatypes of nifti1.h, named in messages.
var otherDatatypes = map[Datatype]string{
	1:    "binary",
	32:   "complex64",
	128:  "RGB24",
	511:  "RGB24", // the code some writers use for DT_RGB (nifti1.h names 128)
	1024: "int64",
	1280: "uint64",
	1536: "float128",
	1792: "complex128",
	2048: "complex256",
	2304: "RGBA32",
}

var datatypeInfo = map[Datatype]struct {
	name     string
	bits     int
	sample   volume.SampleType // the sample type tripass presents (unscaled)
	storedAs volume.SampleType // the stored type, for decoding (Int8 decodes specially)
}{
	Uint8:   {"uint8", 8, volume.Uint8, volume.Uint8},
	Int16:   {"int16", 16, volume.Int16, volume.Int16},
	Int32:   {"int32", 32, volume.Int32, volume.Int32},
	Float32: {"float32", 32, volume.Float32, volume.Float32},
	Float64: {"float64", 64, volume.Float64, volume.Float64},
	Int8:    {"int8", 8, volume.Int16, volume.Invalid},
	Uint16:  {"uint16", 16, volume.Uint16, volume.Uint16},
	Uint32:  {"uint32", 32, volume.Uint32, volume.Uint32},
}

// String returns the name of the datatype ("int16", "complex64", "datatype 99").
func (d Datatype) String() string {
	if i, ok := datatypeInfo[d]; ok {
		return i.name
	}
	if n, ok := otherDatatypes[d]; ok {
		return n
	}
	return "datatype " + strconv.Itoa(int(d))
}

// Size is the number of bytes of one stored sample, 0 for datatypes tripass does not read.
func (d Datatype) Size() int { return datatypeInfo[d].bits / 8 }

// datatypeOf is the datatype a sample type is written as.
func datatypeOf(t volume.SampleType) Datatype {
	switch t {
	case volume.Uint8:
		return Uint8
	case volume.Uint16:
		return Uint16
	case volume.Int16:
		return Int16
	case volume.Uint32:
		return Uint32
	case volume.Int32:
		return Int32
	case volume.Float32:
		return Float32
	case volume.Float64:
		return Float64
	}
	return 0
}

// Spatial units of xyzt_units (its low three bits; nifti1.h NIFTI_UNITS_*).
const (
	unitsMask   = 0x07
	unitsMeter  = 1
	unitsMM     = 2
	unitsMicron = 3
)

// Orientation holds the fields of a NIfTI-1 header that place the voxel grid in world
// coordinates, exactly as stored (float32), so that a filtered volume can be written
// with the placement of its input unchanged. nifti1.h defines two placements: the qform,
// a rotation (a unit quaternion b, c, d with a = √(1−b²−c²−d²)), the voxel spacing
// (pixdim[1..3], with the third axis multiplied by Qfac) and an offset; and the sform,
// a general affine given by its three rows. Each has a code saying what the world
// coordinates are: 0 unknown (the placement is not used), 1 scanner, 2 aligned to
// another image, 3 Talairach, 4 MNI-152, 5 another template. World coordinates are in
// the unit of the file's spacing.
type Orientation struct {
	QformCode int16
	SformCode int16
	Quatern   [3]float32    // quatern_b, quatern_c, quatern_d
	QOffset   [3]float32    // qoffset_x, qoffset_y, qoffset_z
	Qfac      float32       // pixdim[0]: −1 makes the qform left-handed; 0 and 1 mean 1
	Srow      [3][4]float32 // srow_x, srow_y, srow_z
}

// PlainOrientation is the placement Create writes when given none: voxel (i, j, k) at
// (i·sx, j·sy, k·sz), the same in the qform (identity rotation, no offset) and in the
// sform (the diagonal of the spacing). Both codes are 1 (scanner coordinates) when
// the spacing has a physical unit and 0 (unknown, which nifti1.h reads as this same
// scaling, its "method 1") when it does not. Unknown (zero) spacings count as 1.
func PlainOrientation(h volume.Header) Orientation {
	h = h.Normalize()
	var code int16
	if h.Unit != "" {
		code = 1
	}
	o := Orientation{QformCode: code, SformCode: code, Qfac: 1}
	sp, _ := spacingInFileUnit(h)
	for i := 0; i < 3; i++ {
		o.Srow[i][i] = float32(sp[i])
	}
	return o
}

// QformAffine returns the 4×4 matrix that maps voxel indices (i, j, k, 1) to world
// coordinates by the qform fields and the given spacing (pixdim[1..3]), following the
// formula of nifti1.h ("method 2"), whatever QformCode says.
func (o Orientation) QformAffine(spacing [3]float64) [4][4]float64 {
	b, c, d := float64(o.Quatern[0]), float64(o.Quatern[1]), float64(o.Quatern[2])
	a2 := 1 - (b*b + c*c + d*d)
	var a float64
	if a2 > 0 {
		a = math.Sqrt(a2)
	} else {
		// Rounding of stored values: a 180° rotation, renormalise (b, c, d) as
		// nifti1_io.c's nifti_quatern_to_mat44 does.
		n := math.Sqrt(b*b + c*c + d*d)
		if n > 0 {
			b, c, d = b/n, c/n, d/n
		}
	}
	r := [3][3]float64{
		{a*a + b*b - c*c - d*d, 2*b*c - 2*a*d, 2*b*d + 2*a*c},
		{2*b*c + 2*a*d, a*a + c*c - b*b - d*d, 2*c*d - 2*a*b},
		{2*b*d - 2*a*c, 2*c*d + 2*a*b, a*a + d*d - c*c - b*b},
	}
	z := spacing
	if o.Qfac < 0 {
		z[2] = -z[2]
	}
	var m [4][4]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 3; j++ {
			m[i][j] = r[i][j] * z[j]
		}
		m[i][3] = float64(o.QOffset[i])
	}
	m[3][3] = 1
	return m
}

// SformAffine returns the 4×4 matrix of the sform rows ("method 3" of nifti1.h),
// whatever SformCode says.
func (o Orientation) SformAffine() [4][4]float64 {
	var m [4][4]float64
	for i := 0; i < 3; i++ {
		for j := 0; j < 4; j++ {
			m[i][j] = float64(o.Srow[i][j])
		}
	}
	m[3][3] = 1
	return m
}

// Affine returns the placement a reader should use: the sform when SformCode is set,
// else the qform when QformCode is set, else the plain scaling by the spacing
// ("method 1"). nifti1.h leaves the choice between sform and qform to the reader;
// this is the order nibabel's Nifti1Header.get_best_affine uses (nibabel 5.0), whose
// last resort differs: it centres the grid and mirrors x, as Analyze 7.5 did.
func (o Orientation) Affine(spacing [3]float64) [4][4]float64 {
	switch {
	case o.SformCode != 0:
		return o.SformAffine()
	case o.QformCode != 0:
		return o.QformAffine(spacing)
	}
	var m [4][4]float64
	for i := 0; i < 3; i++ {
		m[i][i] = spacing[i]
	}
	m[3][3] = 1
	return m
}

// rawHeader is a NIfTI-1 header as stored, with only the fields tripass uses.
type rawHeader struct {
	order     binary.ByteOrder
	dim       [8]int16
	datatype  Datatype
	bitpix    int16
	pixdim    [8]float32
	voxOffset float32
	sclSlope  float32
	sclInter  float32
	xyztUnits uint8
	descrip   string
	orient    Orientation
	magic     [4]byte
}

// decodeHeader decodes the 348 bytes of b, detecting the byte order from sizeof_hdr
// (which nifti1.h and nibabel both use; dim[0] must then lie in 1..7). It checks
// only what decoding needs; parse checks the rest.
func decodeHeader(path string, b []byte) (*rawHeader, error) {
	if len(b) < headerSize {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("header truncated: %d of %d bytes", len(b), headerSize)}
	}
	b = b[:headerSize]
	var order binary.ByteOrder
	le, be := int32(binary.LittleEndian.Uint32(b)), int32(binary.BigEndian.Uint32(b))
	switch {
	case le == headerSize:
		order = binary.LittleEndian
	case be == headerSize:
		order = binary.BigEndian
	case le == nifti2Size || be == nifti2Size:
		return nil, &UnsupportedError{Path: path, Msg: "NIfTI-2 (sizeof_hdr 540) is not supported; tripass reads NIfTI-1"}
	default:
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("not a NIfTI-1 file: sizeof_hdr is %d, want %d", le, headerSize)}
	}
	h := &rawHeader{order: order}
	i16 := func(off int) int16 { return int16(order.Uint16(b[off:])) }
	f32 := func(off int) float32 { return math.Float32frombits(order.Uint32(b[off:])) }
	for i := range h.dim {
		h.dim[i] = i16(offDim + 2*i)
	}
	h.datatype = Datatype(i16(offDatatype))
	h.bitpix = i16(offBitpix)
	for i := range h.pixdim {
		h.pixdim[i] = f32(offPixdim + 4*i)
	}
	h.voxOffset = f32(offVoxOffset)
	h.sclSlope = f32(offSclSlope)
	h.sclInter = f32(offSclInter)
	h.xyztUnits = b[offXYZTUnits]
	d := b[offDescrip : offDescrip+descripLen]
	if i := bytes.IndexByte(d, 0); i >= 0 {
		d = d[:i]
	}
	h.descrip = string(d)
	o := &h.orient
	o.QformCode = i16(offQformCode)
	o.SformCode = i16(offSformCode)
	for i := 0; i < 3; i++ {
		o.Quatern[i] = f32(offQuatern + 4*i)
		o.QOffset[i] = f32(offQOffset + 4*i)
		for j := 0; j < 4; j++ {
			o.Srow[i][j] = f32(offSrow + 16*i + 4*j)
		}
	}
	o.Qfac = h.pixdim[0]
	copy(h.magic[:], b[offMagic:])
	return h, nil
}

// parsed is what a reader needs from a checked header.
type parsed struct {
	h         volume.Header // as presented to the caller
	stored    Datatype
	voxOffset int64
	volumes   int64 // volumes in the file: the product of dim[4..dim[0]]
	dataStart int64 // where the volume read starts: voxOffset + its index · its size
	scaled    bool  // slope and inter are applied
	slope     float64
	inter     float64
}

// parse checks a decoded header and turns it into a volume header: dimensions, data
// type and bitpix, spacing and unit, data offset and scaling. vol < 0 refuses a series
// of volumes; vol ≥ 0 picks volume vol of it (0 for a 3D file). It allocates nothing
// in proportion to what the header claims.
func (r *rawHeader) parse(path string, vol int) (*parsed, error) {
	switch r.magic {
	case magicSingle:
	case magicPair:
		return nil, &UnsupportedError{Path: path, Msg: "a two-file NIfTI-1 header (a .hdr/.img pair, magic \"ni1\") is not supported; save it as a single .nii"}
	default:
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("no NIfTI-1 magic \"n+1\" at byte %d (found %q); Analyze 7.5 files are not supported", offMagic, bytes.TrimRight(r.magic[:], "\x00"))}
	}
	ndim := int(r.dim[0])
	if ndim < 1 || ndim > 7 {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("dim[0] is %d, want 1 to 7 dimensions", ndim)}
	}
	n := [3]int{1, 1, 1}
	series := int64(1) // product of dim[4..dim[0]], bounded: at most 4 factors below 2^15
	for i := 1; i <= ndim; i++ {
		v := int(r.dim[i])
		switch {
		case v < 0:
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf("dim[%d] is negative (%d)", i, v)}
		case v == 0:
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf("dim[%d] is 0: the volume is empty", i)}
		}
		if i <= 3 {
			n[i-1] = v
		} else {
			series *= int64(v)
		}
	}
	if vol >= 0 && int64(vol) >= series {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("volume %d asked for, the file has %d (numbered from 0)", vol, series)}
	}
	if series > 1 && vol < 0 {
		if ndim == 4 {
			return nil, &UnsupportedError{Path: path, Msg: fmt.Sprintf("4D NIfTI (%d volumes) not supported: tripass filters 3D volumes; split the series first", series)}
		}
		return nil, &UnsupportedError{Path: path, Msg: fmt.Sprintf("%dD NIfTI (%d volumes or components per voxel) not supported: tripass filters 3D volumes; split the series first", ndim, series)}
	}
	info, ok := datatypeInfo[r.datatype]
	if !ok {
		if _, known := otherDatatypes[r.datatype]; known {
			return nil, &UnsupportedError{Path: path, Msg: fmt.Sprintf("datatype %d (%v) not supported; tripass reads uint8, int8, int16, uint16, int32, uint32, float32 and float64", int(r.datatype), r.datatype)}
		}
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("unknown datatype %d", int(r.datatype))}
	}
	if int(r.bitpix) != info.bits {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("bitpix is %d, but datatype %v has %d bits per voxel", r.bitpix, r.datatype, info.bits)}
	}
	p := &parsed{stored: r.datatype}
	p.h = volume.Header{NX: n[0], NY: n[1], NZ: n[2], Type: info.sample}

	// Spacing: pixdim[1..3]. nifti1.h asks for positive values; a negative one is taken
	// by its size (common practice of readers), zero means unknown.
	// pixdim of an axis beyond dim[0] (the z of a 2D image) means nothing: it is used
	// when it is a usable number and otherwise left unknown.
	for i := 0; i < 3; i++ {
		s := float64(r.pixdim[i+1])
		if math.IsNaN(s) || math.IsInf(s, 0) {
			if i < ndim {
				return nil, &FormatError{Path: path, Msg: fmt.Sprintf("pixdim[%d] is %g", i+1, s)}
			}
			s = 0
		}
		p.h.Spacing[i] = math.Abs(s)
	}
	switch r.xyztUnits & unitsMask {
	case unitsMeter:
		p.h.Unit = "m"
	case unitsMM:
		p.h.Unit = "mm"
	case unitsMicron:
		p.h.Unit = "um"
	}

	// The data offset: a whole number of bytes after the header and extension flag.
	v := float64(r.voxOffset)
	vs := strconv.FormatFloat(v, 'g', -1, 32) // as stored, without float64 digits
	switch {
	case math.IsNaN(v) || math.IsInf(v, 0) || v != math.Trunc(v):
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("vox_offset %s is not a whole number of bytes", vs)}
	case v < minVoxOffset:
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("vox_offset %s is inside the header (a .nii file's data start at byte %d or later)", vs, minVoxOffset)}
	case v > 1<<62:
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("vox_offset %s is beyond any file", vs)}
	}
	p.voxOffset = int64(v)

	// Scaling, as nibabel's Nifti1Header.get_slope_inter reads it (nibabel 5.0): a
	// slope of 0 or not finite means no scaling (nifti1.h: "if scl_slope is 0, no
	// scaling"); a finite slope with an intercept that is not finite is an error.
	slope, inter := float64(r.sclSlope), float64(r.sclInter)
	if slope != 0 && !math.IsNaN(slope) && !math.IsInf(slope, 0) {
		if math.IsNaN(inter) || math.IsInf(inter, 0) {
			return nil, &FormatError{Path: path, Msg: fmt.Sprintf("scl_slope is %g but scl_inter is %g", slope, inter)}
		}
		if slope != 1 || inter != 0 {
			p.scaled, p.slope, p.inter = true, slope, inter
			p.h.Type = volume.Float32
			if r.datatype == Float64 {
				p.h.Type = volume.Float64 // keep float64 data's precision
			}
		}
	}
	if err := p.h.Validate(); err != nil {
		return nil, &FormatError{Path: path, Msg: "bad dimensions", Err: err}
	}
	// The whole series must stay within the same bound as one volume, so that the
	// offsets below cannot overflow.
	p.volumes = series
	if series > volume.MaxVoxels/p.h.Voxels() {
		return nil, &FormatError{Path: path, Msg: fmt.Sprintf("bad dimensions: %d volumes of %d×%d×%d voxels exceed 2^40", series, p.h.NX, p.h.NY, p.h.NZ), Err: volume.ErrSize}
	}
	p.dataStart = p.voxOffset + int64(max(vol, 0))*p.storedBytes()
	return p, nil
}

// fileBytes is where the data of every volume end.
func (p *parsed) fileBytes() int64 { return p.voxOffset + p.volumes*p.storedBytes() }

// storedBytes is the size of the data as stored.
func (p *parsed) storedBytes() int64 { return p.h.Voxels() * int64(p.stored.Size()) }

// storedSliceBytes is the size of one slice as stored.
func (p *parsed) storedSliceBytes() int { return p.h.SliceLen() * p.stored.Size() }

// spacingInFileUnit converts h's spacing to a unit NIfTI-1 can name (m, mm, µm; nm
// becomes µm and cm mm) and returns it with the xyzt_units code.
func spacingInFileUnit(h volume.Header) ([3]float64, uint8) {
	sp := h.Spacing
	switch h.Unit {
	case "m":
		return sp, unitsMeter
	case "mm":
		return sp, unitsMM
	case "um":
		return sp, unitsMicron
	case "cm":
		for i := range sp {
			sp[i] *= 10
		}
		return sp, unitsMM
	case "nm":
		for i := range sp {
			sp[i] /= 1000
		}
		return sp, unitsMicron
	}
	return sp, 0
}

// encodeHeader builds the 352 bytes (header and a zero extension flag) of a
// little-endian single-file NIfTI-1 image of h with data at byte 352.
func encodeHeader(h volume.Header, o Orientation, descrip string) []byte {
	h = h.Normalize()
	b := make([]byte, minVoxOffset)
	le := binary.LittleEndian
	put16 := func(off int, v int16) { le.PutUint16(b[off:], uint16(v)) }
	putf := func(off int, v float32) { le.PutUint32(b[off:], math.Float32bits(v)) }
	le.PutUint32(b[offSizeofHdr:], headerSize)
	b[offRegular] = 'r' // Analyze's "regular" flag, which nifti1.h keeps unused but nibabel sets
	dt := datatypeOf(h.Type)
	dims := [8]int16{3, int16(h.NX), int16(h.NY), int16(h.NZ), 1, 1, 1, 1}
	for i, d := range dims {
		put16(offDim+2*i, d)
	}
	put16(offDatatype, int16(dt))
	put16(offBitpix, int16(8*dt.Size()))
	sp, units := spacingInFileUnit(h)
	pix := [8]float32{o.Qfac, float32(sp[0]), float32(sp[1]), float32(sp[2]), 1, 1, 1, 1}
	for i, v := range pix {
		putf(offPixdim+4*i, v)
	}
	putf(offVoxOffset, minVoxOffset)
	putf(offSclSlope, 1) // explicit identity scaling: slope 1, intercept 0
	putf(offSclInter, 0)
	b[offXYZTUnits] = units
	copy(b[offDescrip:offDescrip+descripLen-1], descrip) // keep a terminating NUL
	put16(offQformCode, o.QformCode)
	put16(offSformCode, o.SformCode)
	for i := 0; i < 3; i++ {
		putf(offQuatern+4*i, o.Quatern[i])
		putf(offQOffset+4*i, o.QOffset[i])
		for j := 0; j < 4; j++ {
			putf(offSrow+16*i+4*j, o.Srow[i][j])
		}
	}
	copy(b[offMagic:], magicSingle[:])
	return b
}
