// Package volume is tripass's model of a 3D imaging volume and its streaming engine.
//
// A volume is described by a Header (size, voxel spacing with its unit, sample type) and
// travels as a sequence of z-slices. A Source yields slices in order into a Slice that the
// caller owns and reuses; a Sink takes them in order and commits the output on Close, or
// discards it on Abort. Format packages under io/ implement both ends; nothing on this path
// holds more than a few slices, so a stack of any depth fits in bounded memory.
//
// x varies fastest in a slice, then y; z is the slice index. Slice data are little-endian
// bytes of the header's sample type; ToFloat32 and FromFloat32 move them to and from the
// float32 working buffers of the filtering engine, rounding to nearest and clamping on the
// way back to integer types.
//
// Filter is the engine: it applies 3D kernels, in the forms package tensor plans them
// (direct taps, a sum of separable terms, a Tucker tree of 1D passes), as true
// convolutions of the volume extended beyond its borders by an Edge rule, holding only
// the few slices the kernels' depth needs. MemSource, GenSource and MemSink are
// in-memory ends for tests, benchmarks and volumes built in code.
package volume
