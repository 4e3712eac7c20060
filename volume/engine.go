package volume

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"strconv"
	"sync"
	"sync/atomic"

	"github.com/tripass/tripass/tensor"
)

// Combine says how Filter merges the outputs of several plans voxel by voxel.
type Combine int

const (
	// CombineNone takes the output of exactly one plan.
	CombineNone Combine = iota
	// CombineSum adds the plans' outputs (each times its scale).
	CombineSum
	// CombineMagnitude takes the square root of the sum of the squared outputs (each
	// times its scale): the gradient magnitude from three derivative plans.
	CombineMagnitude
)

// String returns "none", "sum" or "magnitude".
func (c Combine) String() string {
	switch c {
	case CombineNone:
		return "none"
	case CombineSum:
		return "sum"
	case CombineMagnitude:
		return "magnitude"
	}
	return "Combine(" + strconv.Itoa(int(c)) + ")"
}

// FilterOptions are the settings of Filter. The zero value filters with the symmetric
// extension, all cores, no scaling and no progress reports.
type FilterOptions struct {
	// Edge is the extension of the volume beyond its borders along every axis.
	Edge Edge
	// Fill is the value beyond the borders for EdgeConstant.
	Fill float64
	// Threads is the number of compute goroutines; 0 means runtime.GOMAXPROCS(0), which
	// is also the most used. The output does not depend on it, bit for bit.
	Threads int
	// Scale, if not nil, holds one factor per plan that multiplies the plan's output
	// before the outputs are combined (for example 1/32 for calibrated Sobel plans).
	Scale []float64
	// Progress, if not nil, is called after each output slice is written with the number
	// of slices written and the total. It is called from one goroutine (not the
	// caller's), in order.
	Progress func(done, total int)
	// MaxBufferBytes, if positive, makes Filter fail with ErrMemory, before it allocates
	// anything, when its buffers would exceed this many bytes (see FilterStats).
	MaxBufferBytes int64
	// TempDir is the folder of the temporary copy of the input that periodic edges need
	// when the source cannot seek (see Filter); "" means os.TempDir().
	TempDir string
}

// ErrMemory is returned by Filter when its buffers would exceed
// FilterOptions.MaxBufferBytes.
var ErrMemory = errors.New("not enough memory allowed")

// FilterStats reports what Filter did.
type FilterStats struct {
	Slices  int   // output slices written
	Clamped int64 // output values clamped (or NaN) on conversion to an integer type
	NaN     int64 // NaN voxels in the input
	Inf     int64 // infinite voxels in the input
	// PeakBufferBytes is the size of the working buffers the engine allocated: the bound
	// on its memory, which depends on the slice size and the kernels' depth, not on the
	// number of slices.
	PeakBufferBytes int64
	// SpillBytes is the size of the temporary copy of the input made for periodic edges
	// along z from a source that cannot seek; 0 otherwise.
	SpillBytes int64
}

// Filter applies each plan to the volume read from src, combines the plans' outputs
// voxel by voxel, converts the result to outType and writes it to dst slice by slice.
// It neither closes src nor dst; src must be positioned at its first slice.
//
// Each plan is a true 3D convolution of the edge-extended volume: the taps are mirrored,
// so that out(x) = Σ_j K(j)·f(x + c − j) with the centre c = tensor.Center(n) per axis,
// the definition that scipy.ndimage.convolve also follows (even sizes included).
//
// Data path. A reader goroutine reads each slice, decodes it to float32 and extends it
// along x (and along y for direct plans) by the edge rule. For CP and Tucker plans the
// compute stage runs each branch's first in-plane pass and each leaf's second pass on the
// slice as it arrives and stores the leaf's result in that leaf's ring buffer; for direct
// plans the extended input slice itself goes into a ring. As soon as every slice that
// output slice z needs is in its ring, the stage forms it (for each leaf, Σ_j Z(j)·ring
// slice; for direct plans, every non-zero tap as a shifted view of a ring slice),
// combines the plans and hands it to a writer goroutine, which converts it to outType
// (FromFloat32: rounding, clamping) and writes it. Reading, computing and writing
// overlap through bounded channels with a few slices in flight.
//
// Memory. The buffers hold about leaves·(kz + 4) slices for CP and Tucker plans (kz + 1
// input slices for direct plans) plus a few slices in flight, where kz is the kernels'
// depth; nothing grows with the number of slices. (Output slices are formed four at a
// time, so that the z pass reads each ring slice from memory once per four outputs.)
// Near the ends of the stack the edge extension along z needs slices again; the ring
// keeps them (the schedule is worked out in advance, so the ring is as deep as the worst
// case needs and no slice is read twice). Periodic edges need the last slices before the
// first output: Filter keeps the first and last kz/2 slices' results apart and reads the
// last ones first, seeking with SliceSeeker; a source that cannot seek is first copied
// to a temporary file (FilterOptions.TempDir), which is then read twice — that costs
// disk space the size of the input but no memory. A stack not much deeper than the
// kernel is held whole (it is small). FilterStats.PeakBufferBytes reports the buffers'
// size and FilterOptions.MaxBufferBytes bounds it.
//
// Edges. The extension along each axis is Edge, applied exactly as a 3D extension of the
// volume, for any kernel size (indices fold as often as needed, as SciPy's ndimage does).
// For EdgeConstant the value beyond the border is Fill for the input; an intermediate
// result of separable passes is extended by Fill times the sum of the taps applied so far,
// which is what the true 3D convolution gives. (scipy.ndimage.gaussian_filter with cval ≠
// 0 instead pads each 1D pass with cval itself, so it differs near the borders; this
// engine equals scipy.ndimage.convolve of the full 3D kernel with mode='constant'.)
//
// Threads. Each slice's rows are cut into blocks of a few thousand values, shared among
// FilterOptions.Threads workers, each with its own scratch; every output value receives
// its taps in the same order whatever the block, so the output is identical for any
// number of threads.
//
// Precision. The passes accumulate in float32 (one rounding per tap, through a SIMD
// axpy), which keeps the engine at memory speed; direct plans sum runs of 24 taps in
// float32 and the runs in float64, since a dense kernel may have thousands of taps. The
// package tests measure the largest difference from SciPy's float64 results at about
// 3e-7 of the data range for kernels of 3 to 61 taps per axis, and at 1.5e-6 (σ = 2) and
// 4e-6 (σ = 7.5, 61 taps) on data whose offset from zero is ten times its range, within
// the 1e-5 that tripass promises. Every pass adds its taps smallest first, which halves
// the error of the latter case.
//
// NaN and infinite input voxels are counted in the stats and propagate through the
// arithmetic (a NaN spreads over the kernel's support).
func Filter(dst SliceWriter, src Source, outType SampleType, plans []*tensor.Plan, combine Combine, opt FilterOptions) (FilterStats, error) {
	var stats FilterStats
	h := src.Header()
	if err := h.Validate(); err != nil {
		return stats, err
	}
	if !outType.Valid() {
		return stats, fmt.Errorf("filter: invalid output sample type %v", outType)
	}
	if !opt.Edge.Valid() {
		return stats, fmt.Errorf("filter: invalid edge %v", opt.Edge)
	}
	if math.IsNaN(opt.Fill) || math.IsInf(opt.Fill, 0) {
		return stats, fmt.Errorf("filter: fill value %g is not finite", opt.Fill)
	}
	if opt.Threads < 0 {
		return stats, fmt.Errorf("filter: %d threads", opt.Threads)
	}
	switch combine {
	case CombineNone:
		if len(plans) != 1 {
			return stats, fmt.Errorf("filter: combine none needs exactly one plan, have %d", len(plans))
		}
	case CombineSum, CombineMagnitude:
		if len(plans) == 0 {
			return stats, errors.New("filter: no plans")
		}
	default:
		return stats, fmt.Errorf("filter: invalid combine %v", combine)
	}
	if opt.Scale != nil && len(opt.Scale) != len(plans) {
		return stats, fmt.Errorf("filter: %d scale factors for %d plans", len(opt.Scale), len(plans))
	}
	e := &engine{h: h, nx: h.NX, ny: h.NY, nz: h.NZ, edge: opt.Edge, fill64: opt.Fill, fill: float32(opt.Fill), combine: combine, outType: outType, progress: opt.Progress}
	for i, p := range plans {
		s := 1.0
		if opt.Scale != nil {
			s = opt.Scale[i]
		}
		fill := 0.0
		if opt.Edge == EdgeConstant {
			fill = opt.Fill
		}
		c, err := compilePlan(i, p, s, fill)
		if err != nil {
			return stats, fmt.Errorf("filter: %w", err)
		}
		e.plans = append(e.plans, c)
	}
	// More workers than processors would only take turns (and spin between phases).
	e.threads = runtime.GOMAXPROCS(0)
	if opt.Threads > 0 {
		e.threads = min(opt.Threads, e.threads)
	}
	e.layout()
	e.schedule()

	// Periodic edges with the last slices cached need a source that can seek.
	if e.nTail > 0 {
		seeker, ok := src.(SliceSeeker)
		if !ok {
			sp, err := newSpill(src, opt.TempDir)
			if err != nil {
				return stats, err
			}
			defer sp.Close()
			stats.SpillBytes = h.Bytes()
			src, seeker = sp, sp
		}
		e.seeker = seeker
	}
	if need := e.bufferBytes(); opt.MaxBufferBytes > 0 && need > opt.MaxBufferBytes {
		return stats, fmt.Errorf("filter: %w: the kernels need %.1f MiB of buffers for %d×%d slices, more than the limit of %.1f MiB",
			ErrMemory, float64(need)/(1<<20), h.NX, h.NY, float64(opt.MaxBufferBytes)/(1<<20))
	}
	e.alloc()
	err := e.run(dst, src)
	stats.Slices = e.written
	stats.Clamped = e.clamped
	stats.NaN = e.nan
	stats.Inf = e.inf
	stats.PeakBufferBytes = e.bytes
	return stats, err
}

// inBuf is one decoded, edge-extended input slice.
type inBuf struct {
	idx      int
	data     []float32
	nan, inf int64
	err      error
}

// outBuf is one output slice in the engine's row layout.
type outBuf struct {
	z    int
	data []float32
}

type phase int

const (
	phaseX  phase = iota // XYZ: first pass along x of the current branch into e.g
	phaseY               // XYZ: second passes along y of the current branch's leaves
	phaseYX              // YXZ: first pass along y and second passes along x, per block
	phaseZ               // z passes and combination for the current group of outputs
)

// helper is the state of a compute goroutine other than the engine's own.
type helper struct {
	sleeping atomic.Bool
	wake     chan struct{} // a token wakes a sleeping helper
}

type engine struct {
	h          Header
	nx, ny, nz int
	edge       Edge
	fill       float32
	fill64     float64
	combine    Combine
	outType    SampleType
	progress   func(done, total int)
	plans      []*compiled
	anyDirect  bool

	// Layout: every working buffer stores row y at y*S, with S = padL + nx + padR.
	// Input slices are extended by padL, padR columns (and padT, padB rows for direct
	// plans) and hold sample (x, y) at (y+padT)*S + padL + x; the results of passes along
	// x and of whole plans hold it at y*S + x (the columns beyond nx are scratch).
	S                      int
	padL, padR, padT, padB int
	left, right, top, bot  []int // source index of each pad column or row, −1 for Fill
	inLen                  int   // floats in an input buffer, with a row of slack
	block                  int   // rows per block of work
	nblocks                int

	// The z schedule: slot of each input slice in the rings.
	zBefore, zAfter int
	group           int // output slices formed together (see schedule)
	holdAll         bool
	ring            int // ring slots for slices read in sequence
	nHead, nTail    int // slots for the first and last slices kept for periodic edges
	nslots          int
	filled          []int    // input index held in each slot, −1 when none
	inRing          []*inBuf // direct plans' inputs per slot
	seeker          SliceSeeker

	g       []float32     // XYZ first-pass result
	chunk   [][]float32   // per worker: YXZ first-pass result of one block
	acc     [][][]float32 // per worker and group member: one plan's output block (magnitude)
	dsts    [][][]float32 // per worker: where each group member's plan output goes
	dtmp    [][]float32   // per worker: one kernel row's sum (direct plans)
	dacc    [][]float64   // per worker: a direct plan's output block
	threads int
	bytes   int64

	// state of the current phase, set by the compute goroutine before it publishes the
	// phase to the helpers (nextBlock)
	cur       *inBuf
	curSlot   int
	curPlan   *compiled
	curBranch *branchPass
	curZ      int         // first output slice of the current group
	curOuts   [][]float32 // the group's output slices
	outs      []*outBuf

	helpers   []helper       // index 1 … threads−1; worker 0 is the compute goroutine
	hwg       sync.WaitGroup // running helpers
	stop      atomic.Bool    // helpers must return
	wg        sync.WaitGroup // blocks of the current phase not yet done
	epoch     int64          // number of the current phase
	curPhase  atomic.Int32   // kind of the current phase
	nextBlock atomic.Int64   // epoch<<32 | next block of rows to take

	inFree  chan *inBuf
	inCh    chan *inBuf
	outFree chan *outBuf
	outCh   chan *outBuf
	quit    chan struct{}
	wdone   chan struct{}
	rwg     sync.WaitGroup
	wfailed atomic.Bool
	werr    error

	written  int
	clamped  int64
	nan, inf int64
}

// layout works out the padding and the row stride of the working buffers.
func (e *engine) layout() {
	for _, c := range e.plans {
		e.padL = max(e.padL, c.before[0])
		e.padR = max(e.padR, c.after[0])
		if c.direct {
			e.anyDirect = true
			e.padT = max(e.padT, c.before[1])
			e.padB = max(e.padB, c.after[1])
		}
		e.zBefore = max(e.zBefore, c.before[2])
		e.zAfter = max(e.zAfter, c.after[2])
	}
	e.S = e.padL + e.nx + e.padR
	e.inLen = (e.padT+e.ny+e.padB)*e.S + e.S
	e.left = edgeTable(e.edge, -e.padL, e.padL, e.nx)
	e.right = edgeTable(e.edge, e.nx, e.padR, e.nx)
	e.top = edgeTable(e.edge, -e.padT, e.padT, e.ny)
	e.bot = edgeTable(e.edge, e.ny, e.padB, e.ny)
	// Blocks of about 4096 values (16 KiB): a block and its source fit in L1.
	const blockValues = 4096
	e.block = max(1, blockValues/e.S)
	e.nblocks = (e.ny + e.block - 1) / e.block
	e.threads = max(1, min(e.threads, e.nblocks))
}

// edgeTable maps the n indices from, from+1, ... to their sources under edge e along an
// axis of length size (−1 for the fill value).
func edgeTable(e Edge, from, n, size int) []int {
	t := make([]int, n)
	for i := range t {
		j, ok := e.Index(from+i, size)
		if !ok {
			j = -1
		}
		t[i] = j
	}
	return t
}

// schedule works out which input slices the rings must hold. Output slice z needs the
// input slices at the (edge-mapped) indices z−zBefore … z+zAfter. Slices are read in
// order and output slices are formed as soon as possible; the ring must then hold, for
// every z, the slices from the lowest index z needs to the highest read so far. That
// span is computed here over the whole stack (a cheap integer loop), so any kernel
// depth, edge and stack depth get a ring deep enough and no deeper.
func (e *engine) schedule() {
	nz := e.nz
	if e.edge == EdgePeriodic {
		e.nHead, e.nTail = max(0, e.zAfter), max(0, e.zBefore)
	}
	// Output slices are formed in groups of e.group: the z pass then reads each ring
	// slice once per group instead of once per output slice, which matters when the
	// ring is larger than the processor's caches. Direct plans gain nothing from it.
	e.group = 1
	for _, c := range e.plans {
		if !c.direct && e.zBefore+e.zAfter > 0 {
			e.group = zGroup
		}
	}
	cached := func(j int) bool { return j < e.nHead || j >= nz-e.nTail }
	ring, hi := 1, -1
	// Groups away from both ends all need the same span, shifted: visit the first and
	// last few groups and one group in the middle, so that a header claiming a very deep
	// stack costs no time here (the groups skipped would only repeat the middle one;
	// their highest index grows with z, which the group before the last few carries).
	ngroups := (nz + e.group - 1) / e.group
	k := (e.zBefore+e.zAfter+e.nHead+e.nTail)/e.group + 3
	for g := 0; g < ngroups; g++ {
		if g > k && g < ngroups-k-1 {
			g = ngroups - k - 1
		}
		z0 := g * e.group
		lo, top := math.MaxInt, -1
		for r := z0 - e.zBefore; r <= min(z0+e.group, nz)-1+e.zAfter; r++ {
			j, ok := e.edge.Index(r, nz)
			if !ok || cached(j) {
				continue
			}
			lo, top = min(lo, j), max(top, j)
		}
		hi = max(hi, top)
		if lo <= top {
			ring = max(ring, hi-lo+1)
		}
	}
	if ring+e.nHead+e.nTail >= nz {
		e.holdAll = true
		e.ring, e.nHead, e.nTail = nz, 0, 0
	} else {
		e.ring = ring
	}
	e.nslots = e.ring + e.nHead + e.nTail
}

// zGroup is the number of output slices formed together: 4 cuts the z pass's reads
// of ring slices by about 4 for a 17-tap kernel, for 3 more slices in the rings.
const zGroup = 4

// slotOf returns the ring slot of input slice i.
func (e *engine) slotOf(i int) int {
	switch {
	case e.holdAll:
		return i
	case i < e.nHead:
		return e.ring + i
	case i >= e.nz-e.nTail:
		return e.ring + e.nHead + i - (e.nz - e.nTail)
	}
	return i % e.ring
}

func (e *engine) floats(n int) []float32 {
	e.bytes += int64(n) * 4
	return make([]float32, n)
}

// bufferBytes is what alloc will allocate, in bytes, worked out without allocating.
func (e *engine) bufferBytes() int64 {
	S, ny := int64(e.S), int64(e.ny)
	sliceLen := ny * S
	block := int64(e.block) * S
	var n int64 // float32 values
	needG, needChunk := false, false
	for _, c := range e.plans {
		for _, b := range c.branches {
			needG = needG || (c.order == tensor.XYZ && !b.first.identity())
			needChunk = needChunk || (c.order == tensor.YXZ && !b.first.identity())
			n += int64(len(b.leaves)) * int64(e.nslots) * sliceLen
		}
	}
	if needG {
		n += sliceLen + S
	}
	t := int64(e.threads)
	if needChunk {
		n += t * (block + S)
	}
	if e.combine == CombineMagnitude {
		n += t * int64(e.group) * block
	}
	if e.anyDirect {
		n += t * block * 3 // a float32 and a float64 block
	}
	nin := int64(3)
	if e.anyDirect {
		nin = int64(e.nslots) + 2
	}
	n += nin*int64(e.inLen) + int64(e.group+2)*sliceLen
	return 4*n + int64(e.h.SliceBytes()) + int64(e.nx*e.ny*e.outType.Size())
}

// alloc allocates every working buffer, once.
func (e *engine) alloc() {
	S, ny := e.S, e.ny
	sliceLen := ny * S
	e.filled = make([]int, e.nslots)
	for i := range e.filled {
		e.filled[i] = -1
	}
	needG, needChunk := false, false
	for _, c := range e.plans {
		for _, b := range c.branches {
			if c.order == tensor.XYZ && !b.first.identity() {
				needG = true
			}
			if c.order == tensor.YXZ && !b.first.identity() {
				needChunk = true
			}
			for _, l := range b.leaves {
				l.bufs = make([][]float32, e.nslots)
				for s := range l.bufs {
					l.bufs[s] = e.floats(sliceLen)
				}
			}
		}
	}
	if needG {
		e.g = e.floats(sliceLen + S)
	}
	e.chunk = make([][]float32, e.threads)
	e.acc = make([][][]float32, e.threads)
	e.dsts = make([][][]float32, e.threads)
	e.dtmp = make([][]float32, e.threads)
	e.dacc = make([][]float64, e.threads)
	for w := range e.threads {
		if needChunk {
			e.chunk[w] = e.floats(e.block*S + S)
		}
		e.dsts[w] = make([][]float32, e.group)
		if e.combine == CombineMagnitude {
			e.acc[w] = make([][]float32, e.group)
			for q := range e.group {
				e.acc[w][q] = e.floats(e.block * S)
			}
		}
		if e.anyDirect {
			e.dtmp[w] = e.floats(e.block * S)
			e.dacc[w] = make([]float64, e.block*S)
			e.bytes += int64(e.block*S) * 8
		}
	}
	// Input buffers: two in flight, plus the ring of direct plans' inputs.
	nin := 3
	if e.anyDirect {
		nin = e.nslots + 2
		e.inRing = make([]*inBuf, e.nslots)
	}
	e.inFree = make(chan *inBuf, nin)
	for range nin {
		e.inFree <- &inBuf{data: e.floats(e.inLen)}
	}
	e.inCh = make(chan *inBuf, 1)
	nout := e.group + 2 // a group being formed, one slice queued, one being written
	e.curOuts = make([][]float32, e.group)
	e.outs = make([]*outBuf, e.group)
	e.outFree = make(chan *outBuf, nout)
	for range nout {
		e.outFree <- &outBuf{data: e.floats(sliceLen)}
	}
	e.outCh = make(chan *outBuf, 1)
	e.bytes += int64(e.h.SliceBytes()) + int64(e.nx*e.ny*e.outType.Size()) // I/O slices
}

// run drives the pipeline: reader → compute (this goroutine and its workers) → writer.
func (e *engine) run(dst SliceWriter, src Source) (err error) {
	e.quit = make(chan struct{})
	e.wdone = make(chan struct{})
	e.startHelpers()
	e.rwg.Add(1)
	go e.reader(src)
	go e.writer(dst)
	defer func() {
		close(e.quit)
		close(e.outCh)
		<-e.wdone
		e.rwg.Wait()
		e.stopHelpers()
		if err == nil && e.werr != nil {
			err = e.werr
		}
	}()

	next := 0 // next output slice
	for range e.nz {
		in := <-e.inCh
		if in.err != nil {
			return in.err
		}
		e.nan += in.nan
		e.inf += in.inf
		e.take(in)
		for next < e.nz {
			end := min(next+e.group, e.nz)
			if !e.ready(next, end) {
				break
			}
			if e.wfailed.Load() {
				return nil // the deferred function reports the writer's error
			}
			for q := range end - next {
				e.outs[q] = <-e.outFree
				e.curOuts[q] = e.outs[q].data
			}
			e.curZ, e.curOuts = next, e.curOuts[:end-next]
			e.runPhase(phaseZ)
			for q := range end - next {
				e.outs[q].z = next + q
				e.outCh <- e.outs[q]
			}
			next = end
		}
	}
	if next != e.nz {
		panic(fmt.Sprintf("volume: engine formed %d of %d slices", next, e.nz))
	}
	return nil
}

// take runs the in-plane passes of every plan on input slice in and stores the results
// in the slice's ring slot.
func (e *engine) take(in *inBuf) {
	slot := e.slotOf(in.idx)
	e.cur, e.curSlot = in, slot
	for _, c := range e.plans {
		if c.direct {
			continue
		}
		e.curPlan = c
		if c.order == tensor.YXZ {
			e.runPhase(phaseYX)
			continue
		}
		for _, b := range c.branches {
			e.curBranch = b
			if !b.first.identity() {
				e.runPhase(phaseX)
			}
			e.runPhase(phaseY)
		}
	}
	e.filled[slot] = in.idx
	if e.anyDirect {
		if old := e.inRing[slot]; old != nil {
			e.inFree <- old
		}
		e.inRing[slot] = in
	} else {
		e.inFree <- in
	}
}

// ready reports whether every input slice that output slices z0..z1−1 need has been
// taken.
func (e *engine) ready(z0, z1 int) bool {
	for r := z0 - e.zBefore; r <= z1-1+e.zAfter; r++ {
		j, ok := e.edge.Index(r, e.nz)
		if ok && e.filled[e.slotOf(j)] != j {
			return false
		}
	}
	return true
}
