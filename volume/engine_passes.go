package volume

import (
	"runtime"
	"time"
)

// The compute stage of the engine: the passes on blocks of rows, run by the workers.

// runPhase runs phase ph on every block of rows and returns when all are done. The
// compute goroutine takes blocks itself while the helpers take theirs, so a helper that
// is slow to be scheduled (the reader or the writer may hold the other core) delays
// nothing; helpers spin for a moment between phases, which are short (a fraction of a
// millisecond), and sleep only when no phase comes.
func (e *engine) runPhase(ph phase) {
	if e.threads == 1 {
		for b := range e.nblocks {
			e.block1(ph, 0, b)
		}
		return
	}
	e.epoch++
	e.wg.Add(e.nblocks)
	e.curPhase.Store(int32(ph))
	e.nextBlock.Store(e.epoch << 32)
	for w := 1; w < e.threads; w++ {
		if h := &e.helpers[w]; h.sleeping.CompareAndSwap(true, false) {
			select {
			case h.wake <- struct{}{}:
			default:
			}
		}
	}
	e.take1(ph, 0, e.epoch)
	e.wg.Wait()
}

// helperSpin is how long a helper waits for the next phase before it sleeps.
const helperSpin = 100 * time.Microsecond

func (e *engine) startHelpers() {
	if e.threads == 1 {
		return
	}
	e.helpers = make([]helper, e.threads)
	for w := 1; w < e.threads; w++ {
		e.helpers[w].wake = make(chan struct{}, 1)
		e.hwg.Add(1)
		go e.helperLoop(w)
	}
}

func (e *engine) stopHelpers() {
	if e.threads == 1 {
		return
	}
	e.stop.Store(true)
	for w := 1; w < e.threads; w++ {
		select {
		case e.helpers[w].wake <- struct{}{}:
		default:
		}
	}
	e.hwg.Wait()
}

// helperLoop is helper w: it takes blocks of every phase it sees until told to stop.
func (e *engine) helperLoop(w int) {
	defer e.hwg.Done()
	h := &e.helpers[w]
	seen := int64(0)
	for {
		epoch, ok := e.waitPhase(h, seen)
		if !ok {
			return
		}
		seen = epoch
		e.take1(phase(e.curPhase.Load()), w, epoch)
	}
}

// waitPhase waits for a phase newer than seen: spinning for helperSpin (yielding the
// processor to the reader and writer as it goes), then asleep until runPhase wakes it.
// A helper announces that it sleeps before it looks at the phase a last time, and
// runPhase publishes the phase before it looks for sleepers, so no wake-up is lost.
func (e *engine) waitPhase(h *helper, seen int64) (epoch int64, ok bool) {
	deadline := time.Now().Add(helperSpin)
	for i := 0; ; i++ {
		if e.stop.Load() {
			return 0, false
		}
		if ep := e.nextBlock.Load() >> 32; ep != seen {
			return ep, true
		}
		if i%32 == 31 && time.Now().After(deadline) {
			break
		}
		runtime.Gosched()
	}
	for {
		h.sleeping.Store(true)
		if e.stop.Load() {
			return 0, false
		}
		if ep := e.nextBlock.Load() >> 32; ep != seen {
			h.sleeping.Store(false)
			return ep, true
		}
		<-h.wake
	}
}

// take1 runs phase ph on blocks of rows taken in turn, with worker w's scratch, until
// the phase numbered epoch has none left. The blocks are the same whoever takes them,
// so the output does not depend on the number of workers.
func (e *engine) take1(ph phase, w int, epoch int64) {
	for {
		v := e.nextBlock.Load()
		if v>>32 != epoch || int(v&(1<<32-1)) >= e.nblocks {
			return
		}
		if e.nextBlock.CompareAndSwap(v, v+1) {
			e.block1(ph, w, int(v&(1<<32-1)))
			e.wg.Done()
		}
	}
}

// block1 runs phase ph on block b of rows with worker w's scratch.
func (e *engine) block1(ph phase, w, b int) {
	y0 := b * e.block
	y1 := min(e.ny, y0+e.block)
	switch ph {
	case phaseX:
		e.blockX(y0, y1)
	case phaseY:
		e.blockY(y0, y1)
	case phaseYX:
		e.blockYX(w, y0, y1)
	case phaseZ:
		e.blockZ(w, y0, y1)
	}
}

// blockX: the current branch's pass along x, from the input into e.g (order XYZ).
func (e *engine) blockX(y0, y1 int) {
	S := e.S
	p := &e.curBranch.first
	n := (y1 - y0) * S
	dst := e.g[y0*S : y0*S+n]
	clear(dst)
	in := e.cur.data
	base := (y0+e.padT)*S + e.padL - p.before
	for _, t := range p.order {
		axpy(dst, in[base+t:], p.w[t])
	}
}

// blockY: the current branch's leaves' passes along y (order XYZ).
func (e *engine) blockY(y0, y1 int) {
	S := e.S
	b := e.curBranch
	src, base := e.g, 0
	if b.first.identity() {
		src, base = e.cur.data, e.padT*S+e.padL
	}
	fill := float32(e.fill64 * b.first.sum)
	n := (y1 - y0) * S
	for _, l := range b.leaves {
		dst := l.bufs[e.curSlot][y0*S : y0*S+n]
		if l.second.identity() {
			copy(dst, src[base+y0*S:])
			continue
		}
		e.passY(dst, src, base, y0, y1, &l.second, fill)
	}
}

// blockYX: for each branch the pass along y into the worker's chunk, then each leaf's
// pass along x from it (order YXZ).
func (e *engine) blockYX(w, y0, y1 int) {
	S := e.S
	n := (y1 - y0) * S
	in := e.cur.data
	for _, b := range e.curPlan.branches {
		// g holds rows y0..y1 of the first pass, extended along x, from g[gbase].
		g, gbase := in, (y0+e.padT)*S
		if !b.first.identity() {
			g, gbase = e.chunk[w], 0
			e.passY(g[:n], in, e.padT*S, y0, y1, &b.first, e.fill)
		}
		for _, l := range b.leaves {
			dst := l.bufs[e.curSlot][y0*S : y0*S+n]
			if l.second.identity() {
				copy(dst, g[gbase+e.padL:])
				continue
			}
			clear(dst)
			o := gbase + e.padL - l.second.before
			for _, t := range l.second.order {
				axpy(dst, g[o+t:], l.second.w[t])
			}
		}
	}
}

// passY applies pass p along y to rows y0..y1 of src (row y at base + y*S) into dst
// (row y at (y−y0)*S). Rows beyond the volume are mapped by the edge rule or, for
// EdgeConstant, hold the value fill.
func (e *engine) passY(dst, src []float32, base, y0, y1 int, p *pass, fill float32) {
	S, ny := e.S, e.ny
	clear(dst)
	for _, t := range p.order {
		w := p.w[t]
		d := t - p.before
		lo := min(max(-d, y0), y1)
		hi := min(max(ny-d, lo), y1)
		for y := y0; y < lo; y++ {
			e.edgeRow(dst[(y-y0)*S:(y-y0+1)*S], src, base, y+d, w, fill)
		}
		if lo < hi {
			axpy(dst[(lo-y0)*S:(hi-y0)*S], src[base+(lo+d)*S:], w)
		}
		for y := hi; y < y1; y++ {
			e.edgeRow(dst[(y-y0)*S:(y-y0+1)*S], src, base, y+d, w, fill)
		}
	}
}

func (e *engine) edgeRow(row, src []float32, base, r int, w, fill float32) {
	if j, ok := e.edge.Index(r, e.ny); ok {
		axpy(row, src[base+j*e.S:], w)
	} else {
		addConst(row, w*fill)
	}
}

// blockZ forms rows y0..y1 of the current group of output slices: each plan's pass
// along z (or direct taps), combined.
func (e *engine) blockZ(w, y0, y1 int) {
	S := e.S
	n := (y1 - y0) * S
	off := y0 * S
	outs := e.curOuts
	mag := e.combine == CombineMagnitude
	if !mag {
		for _, o := range outs {
			clear(o[off : off+n])
		}
	}
	dsts := e.dsts[w][:len(outs)]
	last := len(e.plans) - 1
	for pi, c := range e.plans {
		for q, o := range outs {
			if mag {
				dsts[q] = e.acc[w][q][:n]
				clear(dsts[q])
			} else {
				dsts[q] = o[off : off+n]
			}
		}
		if c.direct {
			for q, d := range dsts {
				e.zDirect(w, c, d, y0, e.curZ+q)
			}
		} else {
			e.zSeparable(c, dsts, off)
		}
		if mag {
			// out = √(Σ plan²), with the first square stored and the root taken on
			// the last addition: the same values as summing into zeros, fewer passes.
			for q, o := range outs {
				magnitudeStep(o[off:off+n], dsts[q], pi == 0, pi == last)
			}
		}
	}
}

// zSeparable adds a CP or Tucker plan's z passes for the current group of output
// slices to dsts (one block each). Every output receives its taps in the order of the
// pass (pass.order), whatever its place in the group, block or thread, so that a run
// over part of the stack (FilterRange) gives the same bits. The group's ring blocks
// (about (kz + group)·16 KiB) stay in the L2 cache between their uses, so each ring
// slice comes from memory about once per group.
func (e *engine) zSeparable(c *compiled, dsts [][]float32, off int) {
	z0 := e.curZ
	n := len(dsts[0])
	for _, b := range c.branches {
		for _, l := range b.leaves {
			for _, t := range l.z.order {
				w := l.z.w[t]
				for q, d := range dsts {
					j, ok := e.edge.Index(z0+q+t-l.z.before, e.nz)
					if ok {
						axpy(d, l.bufs[e.slotOf(j)][off:off+n], w)
					} else {
						addConst(d, float32(float64(w)*l.fill))
					}
				}
			}
		}
	}
}

// zDirect adds a direct plan's taps for rows y0.. of output slice z to dst. Taps are
// summed in float32 over runs of whole kernel rows (same dy, dz) of at least
// directRun taps, and the runs in float64: a dense kernel has up to kx·ky·kz taps, and
// one float32 sum over all of them loses digits on data far from zero (measured: 17³
// taps on data in [100, 110] were off by 7e-5 of the data range), while short runs keep
// float32's error negligible and the float64 additions rare.
func (e *engine) zDirect(w int, c *compiled, dst []float32, y0, z int) {
	S := e.S
	n := len(dst)
	tmp, acc := e.dtmp[w][:n], e.dacc[w][:n]
	clear(acc)
	clear(tmp)
	inTmp := 0 // taps summed in tmp since the last flush
	taps := c.taps
	for len(taps) > 0 {
		// one kernel row: the run of taps with the same dz and dy
		k := 1
		for k < len(taps) && taps[k].dz == taps[0].dz && taps[k].dy == taps[0].dy {
			k++
		}
		row := taps[:k]
		taps = taps[k:]
		j, ok := e.edge.Index(z+row[0].dz, e.nz)
		if !ok {
			var s float32
			for _, t := range row {
				s += t.w
			}
			addConst(tmp, s*e.fill)
		} else {
			in := e.inRing[e.slotOf(j)].data
			base := (y0+e.padT+row[0].dy)*S + e.padL
			for _, t := range row {
				axpy(tmp, in[base+t.dx:], t.w)
			}
		}
		inTmp += k
		if inTmp >= directRun || len(taps) == 0 {
			addTo64(acc, tmp)
			clear(tmp)
			inTmp = 0
		}
	}
	for i, v := range acc {
		dst[i] += float32(v)
	}
}

// directRun is the number of direct taps summed in float32 before the sum moves to
// float64 (see zDirect).
const directRun = 24
