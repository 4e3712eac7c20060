package volume

import (
	"fmt"
	"math"
	"sort"

	"github.com/tripass/tripass/tensor"
)

// pass is one 1D pass in correlation form: out(i) = Σ_t w[t]·in(i + t − before). Taps
// come from a plan in kernel order and are mirrored here, so that the pass convolves:
// with the plan's centre c = tensor.Center(n), out(i) = Σ_j K(j)·in(i + c − j).
type pass struct {
	w      []float32
	before int     // taps before the centre (after trimming zero end taps)
	sum    float64 // Σ of the taps (for the constant extension of intermediate results)
	// order lists the non-zero taps by increasing magnitude, the order in which every
	// pass adds them: a partial sum then grows late, so fewer additions round at its
	// full size (for a 61-tap Gaussian on data ten times as far from zero as its range
	// this halves the error). It depends on the taps alone, so every output voxel gets
	// the same sequence of operations in any run.
	order []int
}

func newPass(taps []float64, scale float64) pass {
	n := len(taps)
	c := tensor.Center(n)
	w := make([]float32, n)
	var sum float64
	for t := range w {
		v := scale * taps[n-1-t]
		w[t] = float32(v)
		sum += v
	}
	lo, hi := 0, n
	for lo < hi && w[lo] == 0 {
		lo++
	}
	for hi > lo && w[hi-1] == 0 {
		hi--
	}
	if lo == hi {
		return pass{sum: 0}
	}
	p := pass{w: w[lo:hi], before: n - 1 - c - lo, sum: sum}
	for t, v := range p.w {
		if v != 0 {
			p.order = append(p.order, t)
		}
	}
	sort.SliceStable(p.order, func(a, b int) bool {
		return math.Abs(float64(p.w[p.order[a]])) < math.Abs(float64(p.w[p.order[b]]))
	})
	return p
}

func (p *pass) after() int { return len(p.w) - 1 - p.before }

// identity reports whether the pass leaves its input unchanged (a single tap 1 at the
// centre); such passes are skipped.
func (p *pass) identity() bool { return len(p.w) == 1 && p.w[0] == 1 && p.before == 0 }

func (p *pass) zero() bool { return len(p.w) == 0 }

type leafPass struct {
	second, z pass
	fill      float64 // value of this leaf's in-plane result beyond the volume (EdgeConstant)
	bufs      [][]float32
}

type branchPass struct {
	first  pass
	leaves []*leafPass
}

// directTap is one non-zero tap of a direct kernel in correlation form: it adds
// w·in(x+dx, y+dy, z+dz) to out(x, y, z).
type directTap struct {
	dx, dy, dz int
	w          float32
}

// compiled is a plan prepared for the engine: taps mirrored, scaled, trimmed, converted
// to float32; leaves and branches with a zero pass dropped.
type compiled struct {
	direct   bool
	order    tensor.Order
	branches []*branchPass
	taps     []directTap
	// extents of the kernel's support in correlation offsets, per axis
	before, after [3]int
}

func compilePlan(i int, p *tensor.Plan, scale, fill float64) (*compiled, error) {
	if p == nil || p.Kernel == nil {
		return nil, fmt.Errorf("plan %d: no kernel", i)
	}
	d := p.Kernel.Dims()
	if d[0] <= 0 || d[1] <= 0 || d[2] <= 0 || len(p.Kernel.Data) != d[0]*d[1]*d[2] {
		return nil, fmt.Errorf("plan %d: malformed %d×%d×%d kernel", i, d[0], d[1], d[2])
	}
	c := &compiled{order: p.Order}
	for a := range c.before {
		c.before[a], c.after[a] = -1<<30, -1<<30
	}
	grow := func(axis, before, after int) {
		c.before[axis] = max(c.before[axis], before)
		c.after[axis] = max(c.after[axis], after)
	}
	switch p.Form {
	case tensor.Direct:
		c.direct = true
		cx, cy, cz := tensor.Center(d[0]), tensor.Center(d[1]), tensor.Center(d[2])
		for k := 0; k < d[2]; k++ {
			for j := 0; j < d[1]; j++ {
				for ii := 0; ii < d[0]; ii++ {
					v := float32(scale * p.Kernel.At(ii, j, k))
					if v == 0 {
						continue
					}
					t := directTap{dx: cx - ii, dy: cy - j, dz: cz - k, w: v}
					c.taps = append(c.taps, t)
					grow(0, -t.dx, t.dx)
					grow(1, -t.dy, t.dy)
					grow(2, -t.dz, t.dz)
				}
			}
		}
		// Deterministic order: by z, then y, then x offset.
		sort.Slice(c.taps, func(a, b int) bool {
			ta, tb := c.taps[a], c.taps[b]
			if ta.dz != tb.dz {
				return ta.dz < tb.dz
			}
			if ta.dy != tb.dy {
				return ta.dy < tb.dy
			}
			return ta.dx < tb.dx
		})
	case tensor.CP, tensor.Tucker:
		if p.Order != tensor.XYZ && p.Order != tensor.YXZ {
			return nil, fmt.Errorf("plan %d: unknown pass order %v", i, p.Order)
		}
		fa, sa := 0, 1 // axes of the first and second passes
		if p.Order == tensor.YXZ {
			fa, sa = 1, 0
		}
		for bi, b := range p.Branches {
			if len(b.First) != d[fa] {
				return nil, fmt.Errorf("plan %d, branch %d: first pass has %d taps, kernel has %d along %c", i, bi, len(b.First), d[fa], "xyz"[fa])
			}
			bp := &branchPass{first: newPass(b.First, 1)}
			for li, l := range b.Leaves {
				if len(l.Second) != d[sa] || len(l.Z) != d[2] {
					return nil, fmt.Errorf("plan %d, branch %d, leaf %d: passes of %d and %d taps for a %d×%d×%d kernel", i, bi, li, len(l.Second), len(l.Z), d[0], d[1], d[2])
				}
				lp := &leafPass{second: newPass(l.Second, 1), z: newPass(l.Z, scale)}
				if bp.first.zero() || lp.second.zero() || lp.z.zero() {
					continue
				}
				lp.fill = fill * bp.first.sum * lp.second.sum
				bp.leaves = append(bp.leaves, lp)
				grow(sa, lp.second.before, lp.second.after())
				grow(2, lp.z.before, lp.z.after())
			}
			if len(bp.leaves) > 0 {
				grow(fa, bp.first.before, bp.first.after())
				c.branches = append(c.branches, bp)
			}
		}
	default:
		return nil, fmt.Errorf("plan %d: unknown form %v", i, p.Form)
	}
	for a := range c.before {
		if c.before[a] < 0 && c.after[a] < 0 { // nothing non-zero: the plan adds 0
			c.before[a], c.after[a] = 0, 0
		}
	}
	return c, nil
}

func (c *compiled) empty() bool { return len(c.taps) == 0 && len(c.branches) == 0 }
