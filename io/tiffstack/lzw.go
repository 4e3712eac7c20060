package tiffstack

// lzwEncoder writes TIFF's flavour of LZW (TIFF 6.0 Section 13): codes packed most
// significant bit first, 256 Clear and 257 EndOfInformation, code width growing from 9
// to 12 bits one code early (the width goes up when the next free code reaches 511,
// 1023, 2047, where standard LZW waits one more code), and a Clear when the table
// reaches 4094 entries. The early switch is the quirk libtiff and every TIFF reader
// expect; x/image/tiff/lzw decodes it.
//
// The string table is an open-addressing hash table of (prefix code, byte) → code,
// packed in 32 bits so that the whole table (32 KiB) stays in the L1 cache; a Clear
// zeroes it, which costs less than a microsecond per few thousand codes.
type lzwEncoder struct {
	table [lzwTableSize]uint32 // key<<12 | code, key = prefix<<8 | byte; 0 is empty
	acc   uint64               // bit accumulator, newest bits lowest
	nacc  uint                 // bits held in acc
	out   []byte
}

const (
	lzwClear     = 256
	lzwEOI       = 257
	lzwFirst     = 258
	lzwMaxCode   = 4094 // libtiff clears when the next free code would be 4094
	lzwTableBits = 13   // 8192 slots for at most 3836 entries keeps probes short
	lzwTableSize = 1 << lzwTableBits
)

func lzwWidth(next int) uint {
	switch {
	case next < 511+1:
		return 9
	case next < 1023+1:
		return 10
	case next < 2047+1:
		return 11
	}
	return 12
}

func (e *lzwEncoder) put(code int, width uint) {
	e.acc = e.acc<<width | uint64(code)
	e.nacc += width
	for e.nacc >= 8 {
		e.nacc -= 8
		e.out = append(e.out, byte(e.acc>>e.nacc))
	}
}

func lzwHash(key uint32) uint32 {
	return (key * 2654435761) >> (32 - lzwTableBits) // Knuth's multiplicative hash
}

// encode appends the LZW code stream of src to dst and returns it.
func (e *lzwEncoder) encode(dst, src []byte) []byte {
	e.out, e.acc, e.nacc = dst, 0, 0
	e.table = [lzwTableSize]uint32{}
	width := uint(9)
	e.put(lzwClear, width)
	if len(src) == 0 {
		e.put(lzwEOI, width)
		return e.flush()
	}
	next := lzwFirst
	prefix := uint32(src[0])
	for _, c := range src[1:] {
		key := prefix<<8 | uint32(c)
		h := lzwHash(key)
		found := false
		for {
			v := e.table[h]
			if v>>12 == key && v != 0 {
				prefix, found = v&0xfff, true
				break
			}
			if v == 0 {
				break
			}
			h = (h + 1) & (lzwTableSize - 1)
		}
		if found {
			continue
		}
		e.put(int(prefix), width)
		e.table[h] = key<<12 | uint32(next)
		next++
		if next == lzwMaxCode {
			e.put(lzwClear, width)
			e.table = [lzwTableSize]uint32{}
			next, width = lzwFirst, 9
		} else {
			width = lzwWidth(next)
		}
		prefix = uint32(c)
	}
	e.put(int(prefix), width)
	// The decoder adds a table entry after this last code too, and may widen its codes
	// before it reads EndOfInformation: follow it (as libtiff's encoder does).
	next++
	if next == lzwMaxCode {
		e.put(lzwClear, width)
		width = 9
	} else {
		width = lzwWidth(next)
	}
	e.put(lzwEOI, width)
	return e.flush()
}

func (e *lzwEncoder) flush() []byte {
	if e.nacc > 0 {
		e.out = append(e.out, byte(e.acc<<(8-e.nacc)))
		e.nacc = 0
	}
	out := e.out
	e.out = nil
	return out
}
