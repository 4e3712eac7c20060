package tensor

import (
	"fmt"
	"strings"
)

// Form is the way a plan applies a kernel.
type Form int

const (
	// Direct applies the 3D kernel tap by tap: one multiply-add per non-zero tap.
	Direct Form = iota
	// CP applies a sum of R separable terms, each three 1D passes.
	CP
	// Tucker applies the Tucker form core ×₁ U⁽¹⁾ ×₂ U⁽²⁾ ×₃ U⁽³⁾ as a tree of 1D passes.
	Tucker
)

func (f Form) String() string {
	switch f {
	case Direct:
		return "direct"
	case CP:
		return "cp"
	case Tucker:
		return "tucker"
	}
	return fmt.Sprintf("Form(%d)", int(f))
}

// ParseForm returns the form named s ("direct", "cp" or "tucker").
func ParseForm(s string) (Form, error) {
	switch strings.ToLower(s) {
	case "direct":
		return Direct, nil
	case "cp":
		return CP, nil
	case "tucker":
		return Tucker, nil
	}
	return 0, fmt.Errorf("unknown form %q (want direct, cp or tucker)", s)
}

// Order says which in-plane axis a plan passes first. z always comes last, because the
// streaming engine filters along z from a ring buffer of already filtered slices.
type Order int

const (
	// XYZ passes x first, then y, then z.
	XYZ Order = iota
	// YXZ passes y first, then x, then z.
	YXZ
)

func (o Order) String() string {
	if o == YXZ {
		return "yxz"
	}
	return "xyz"
}

// A Plan is a kernel in the form the filtering engine applies. For Direct, Kernel is
// applied as it is. For CP and Tucker the kernel is approximated by
//
//	Σ_branches Σ_leaves First ∘ Second ∘ Z
//
// where First runs along the plan's first in-plane axis (x for XYZ, y for YXZ), Second
// along the other in-plane axis, and Z along z. The engine runs each branch's First
// pass once per input slice, each leaf's Second pass on its branch's result, and each
// leaf's Z pass from a ring buffer, summing the leaves into the output.
//
// A CP plan with R terms has R branches of one leaf each (the term's weight is folded
// into Z). A Tucker plan with ranks (r1, r2, r3) and order XYZ has r1 branches, one per
// column of the x factor, each with r2 leaves, one per column of the y factor; leaf
// (a, b) has Z = Σ_c core(a, b, c)·U⁽³⁾(:, c), the core's last mode folded into one
// 1D kernel. With order YXZ the roles of x and y swap.
//
// Taps are kernel values in kernel order (not mirrored): the engine mirrors them to
// convolve. Each tap vector has the kernel's length along its axis and the same centre
// (see Center). Along an axis of one tap the planner folds each pass's value into a
// longer pass of the same term, leaving the unit tap [1]: an identity that costs
// nothing (see Macs).
type Plan struct {
	Form     Form
	Order    Order
	Kernel   *Dense // the kernel the plan stands for (kx × ky × kz)
	Branches []Branch
	// Ranks is the multilinear rank (r1, r2, r3) of a Tucker plan; zero otherwise.
	Ranks [3]int
	// RelError is ‖K − plan‖_F / ‖K‖_F, the relative Frobenius error of the plan.
	RelError float64
}

// A Branch is one pass along the plan's first in-plane axis and the leaves that
// continue from its result.
type Branch struct {
	First  []float64
	Leaves []Leaf
}

// A Leaf is a pass along the second in-plane axis followed by a pass along z.
type Leaf struct {
	Second []float64
	Z      []float64
}

// Center returns the index of the origin tap along an axis of n taps: n/2 (integer
// division). For odd n this is the middle tap; for even n it is the later of the two
// middle taps, as in SciPy's ndimage with origin 0.
func Center(n int) int { return n / 2 }

// Shape returns the kernel size (kx, ky, kz).
func (p *Plan) Shape() [3]int { return p.Kernel.Dims() }

// Terms is the number of leaves: the separable terms summed into the output.
func (p *Plan) Terms() int {
	n := 0
	for _, b := range p.Branches {
		n += len(b.Leaves)
	}
	return n
}

// Macs is the cost of the plan in multiply-adds per output voxel: the non-zero taps for
// Direct; the sum of the lengths of all 1D passes for CP and Tucker, which is
// R·(kx+ky+kz) for R CP terms and r1·kx + r1·r2·ky + r1·r2·kz for Tucker with order XYZ.
// A pass that is the single unit tap [1] is the identity and costs nothing, so a flat
// k×k×1 rank-one kernel whose weight is folded into its in-plane taps costs 2k (common
// practice); the engine may skip such passes.
func (p *Plan) Macs() int {
	if p.Form == Direct {
		return p.Kernel.NonZero()
	}
	n := 0
	for _, b := range p.Branches {
		n += passCost(b.First)
		for _, l := range b.Leaves {
			n += passCost(l.Second) + passCost(l.Z)
		}
	}
	return n
}

// passCost is the multiply-adds per voxel of one 1D pass: its length, or 0 for the
// identity [1].
func passCost(taps []float64) int {
	if len(taps) == 1 && taps[0] == 1 {
		return 0
	}
	return len(taps)
}

// Reconstruct returns the kernel that the plan applies: Kernel itself for Direct, the
// sum of its separable terms otherwise.
func (p *Plan) Reconstruct() *Dense {
	if p.Form == Direct {
		return p.Kernel.Clone()
	}
	d := p.Kernel.Dims()
	out := New(d[0], d[1], d[2])
	for _, b := range p.Branches {
		for _, l := range b.Leaves {
			x, y := b.First, l.Second
			if p.Order == YXZ {
				x, y = y, x
			}
			out.AddScaled(1, Outer(1, x, y, l.Z))
		}
	}
	return out
}

// SeparablePlan returns the exact rank-one plan w·x∘y∘z, the form of Gaussian, box,
// Sobel and other separable kernels built in code.
func SeparablePlan(w float64, x, y, z []float64) *Plan {
	zw := make([]float64, len(z))
	for i, v := range z {
		zw[i] = w * v
	}
	return &Plan{
		Form:     CP,
		Order:    XYZ,
		Kernel:   Outer(w, x, y, z),
		Branches: []Branch{{First: append([]float64(nil), x...), Leaves: []Leaf{{Second: append([]float64(nil), y...), Z: zw}}}},
	}
}
