package tiffstack

import "strconv"

// Tags used by tripass (TIFF 6.0, Section 8 and Appendix A; TileWidth and friends are
// Section 15; SampleFormat is Section 19).
const (
	tNewSubfileType  = 254
	tImageWidth      = 256
	tImageLength     = 257
	tBitsPerSample   = 258
	tCompression     = 259
	tPhotometric     = 262
	tImageDesc       = 270
	tStripOffsets    = 273
	tSamplesPerPixel = 277
	tRowsPerStrip    = 278
	tStripByteCounts = 279
	tXResolution     = 282
	tYResolution     = 283
	tPlanarConfig    = 284
	tResolutionUnit  = 296
	tSoftware        = 305
	tPredictor       = 317
	tTileWidth       = 322
	tTileLength      = 323
	tTileOffsets     = 324
	tTileByteCounts  = 325
	tSampleFormat    = 339
)

// Field types (TIFF 6.0 Section 2; LONG8, SLONG8 and IFD8 from the BigTIFF design).
const (
	dtByte      = 1
	dtASCII     = 2
	dtShort     = 3
	dtLong      = 4
	dtRational  = 5
	dtSByte     = 6
	dtUndefined = 7
	dtSShort    = 8
	dtSLong     = 9
	dtSRational = 10
	dtFloat     = 11
	dtDouble    = 12
	dtIFD       = 13
	dtLong8     = 16
	dtSLong8    = 17
	dtIFD8      = 18
)

// typeSize is the size in bytes of one value of each field type; 0 marks a type this
// reader does not know (TIFF 6.0 says readers skip such fields).
var typeSize = [...]int{
	dtByte: 1, dtASCII: 1, dtShort: 2, dtLong: 4, dtRational: 8, dtSByte: 1,
	dtUndefined: 1, dtSShort: 2, dtSLong: 4, dtSRational: 8, dtFloat: 4, dtDouble: 8,
	dtIFD: 4, dtLong8: 8, dtSLong8: 8, dtIFD8: 8,
}

func sizeOfType(t uint16) int {
	if int(t) < len(typeSize) {
		return typeSize[t]
	}
	return 0
}

// Compression codes (TIFF 6.0 Section 3, 13 and 9; 8 and 32946 are Adobe's and the
// older experimental code for Deflate, both zlib streams).
const (
	cNone        = 1
	cLZW         = 5
	cDeflate     = 8
	cDeflateOld  = 32946
	cPackBits    = 32773
	predNone     = 1
	predHoriz    = 2
	predFloat    = 3
	resUnitNone  = 1
	resUnitInch  = 2
	resUnitCenti = 3
)

// compressionName names a compression code for messages and Info, including common
// codes tripass does not read, so that an error says what the file uses.
func compressionName(c uint16) string {
	switch c {
	case cNone:
		return "none"
	case cLZW:
		return "LZW"
	case cDeflate:
		return "Deflate"
	case cDeflateOld:
		return "Deflate (old code 32946)"
	case cPackBits:
		return "PackBits"
	case 2:
		return "CCITT modified Huffman"
	case 3:
		return "CCITT Group 3 fax"
	case 4:
		return "CCITT Group 4 fax"
	case 6:
		return "old-style JPEG"
	case 7:
		return "JPEG"
	case 34712:
		return "JPEG 2000"
	case 34925:
		return "LZMA"
	case 50000:
		return "Zstandard"
	case 50001:
		return "WebP"
	case 50002:
		return "JPEG XL"
	}
	return "code " + strconv.Itoa(int(c))
}

func predictorName(p uint16) string {
	switch p {
	case predNone:
		return "none"
	case predHoriz:
		return "horizontal differencing"
	case predFloat:
		return "floating-point"
	}
	return "code " + strconv.Itoa(int(p))
}
