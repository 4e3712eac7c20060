package tensor

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// DefaultTolerance is the relative Frobenius error ‖K − plan‖/‖K‖ a plan may have when
// AnalyzeOptions.Tolerance is zero: far below float32's 6e-8 per operation times the few
// hundred operations of a voxel, so a planned filter differs from the direct one by
// about as much as float32 rounding does.
const DefaultTolerance = 1e-6

// DefaultMaxCPTerms is the largest number of CP terms Analyze tries by default. Six
// terms of a 31³ kernel cost 558 multiply-adds per voxel against 29791 direct; beyond a
// handful of terms a Tucker form is usually cheaper.
const DefaultMaxCPTerms = 6

// quickCPIter caps the CP-ALS runs that cannot meet the tolerance (their error is
// bounded below by the discarded n-mode singular values) and are run only to report an
// error.
const quickCPIter = 50

// quickCPRank is the multilinear rank of the core that the short CP runs fit: the
// leading singular subspaces that an r-term fit mostly lives in, with room to spare.
// The reported error is still measured against the kernel itself.
func quickCPRank(r int) int { return 2*r + 2 }

// AnalyzeOptions controls Analyze. The zero value asks for the defaults.
type AnalyzeOptions struct {
	// Tolerance is the largest relative Frobenius error a chosen plan may have.
	// Zero means DefaultTolerance; it must not be negative.
	Tolerance float64
	// MaxCPTerms is the largest number of CP terms tried. Zero means
	// DefaultMaxCPTerms; negative means no CP candidates.
	MaxCPTerms int
	// Restarts and Seed are passed to CPALS (random restarts; seed of their generator).
	Restarts int
	Seed     uint64
	// Force, if not nil, restricts the choice to one form: the cheapest plan of that
	// form within the tolerance, or, if none is, its most accurate non-degenerate plan.
	Force *Form
	// ExactZero is the relative size below which an n-mode singular value counts as
	// zero in the exact statements (ExactRank, Separable). Zero means NumericalZero,
	// right for kernels computed in float64. A kernel stored in float32 carries rounding
	// errors E with ‖E‖_F ≤ u‖K‖_F, u = 2⁻²⁴, and by Weyl's inequality they move every
	// singular value by at most ‖E‖_F, so a small multiple of u (Float32ExactZero) is
	// the threshold that still calls such a kernel exactly what it was before rounding.
	ExactZero float64
}

// Float32ExactZero is ExactZero for kernels stored in float32: four times the unit
// roundoff 2⁻²⁴ (the factor leaves room for the float64 arithmetic of the analysis).
const Float32ExactZero = 4.0 / (1 << 24)

// An Option is one candidate way of applying a kernel, with its true error and cost.
type Option struct {
	Form Form
	// Terms is the number of separable terms summed (CP terms or Tucker leaves; 0 for
	// Direct).
	Terms int
	// Ranks is the multilinear rank of a Tucker option; zero otherwise.
	Ranks [3]int
	// Order is the order of the in-plane passes.
	Order Order
	// RelError is the true relative error ‖K − Plan.Reconstruct()‖/‖K‖.
	RelError float64
	// Bound is, for a Tucker option, the relative error bound of De Lathauwer et al.
	// (2000) at its ranks, which holds for the truncated HOSVD and the sequentially
	// truncated one alike (Vannieuwenhoven et al. 2012); zero otherwise.
	Bound float64
	// Macs is Plan.Macs(), the multiply-adds per output voxel.
	Macs int
	// Degenerate marks a CP fit whose terms diverge and cancel (see CPResult); it is
	// reported but never chosen. Cancellation is Σ|λ_r|/‖K‖ for CP options.
	Degenerate   bool
	Cancellation float64
	// Plan is the plan itself, ready for the filtering engine.
	Plan *Plan
}

// Analysis is what Analyze finds out about a kernel.
type Analysis struct {
	// Shape is (kx, ky, kz) and Norm the Frobenius norm ‖K‖.
	Shape [3]int
	Norm  float64
	// Tolerance is the relative error the choice was made for.
	Tolerance float64
	// ModeSingularValues holds the n-mode singular values for x, y and z, each
	// descending: the singular values of the kernel's unfoldings (see Unfold), as many
	// as the smaller side of the unfolding (kx or ky·kz for x, and so on).
	ModeSingularValues [3][]float64
	// MultilinearRank is the multilinear rank at the tolerance: per mode, the smallest
	// rank whose discarded squared n-mode singular values sum to at most
	// tol²‖K‖²/3, which keeps the truncated HOSVD within tol (see RanksForTolerance).
	MultilinearRank [3]int
	// ExactRank is the numerical multilinear rank: n-mode singular values above
	// AnalyzeOptions.ExactZero (by default NumericalZero) times the largest count (see
	// NumericalRank). A kernel stored in float32 carries rounding noise far above
	// NumericalZero: analyse it with ExactZero = Float32ExactZero.
	ExactRank [3]int
	// Separable says the kernel is exactly rank one, one outer product x∘y∘z: its
	// numerical multilinear rank is (1, 1, 1).
	Separable bool
	// DirectMacs is the cost of direct application: the kernel's non-zero taps.
	DirectMacs int
	// Options lists every candidate tried: Direct first, then CP with 1, 2, … terms,
	// then Tucker forms.
	Options []Option
	// Chosen points into Options: the cheapest option within the tolerance that is not
	// degenerate, Direct if none is cheaper than it.
	Chosen *Option
}

// Speedup returns the predicted speed-up of the chosen plan over direct application,
// DirectMacs / Chosen.Macs (+Inf for a plan that costs nothing, such as the identity).
func (a *Analysis) Speedup() float64 {
	if a.Chosen == nil {
		return 1
	}
	return float64(a.DirectMacs) / float64(a.Chosen.Macs)
}

// Analyze decides how cheaply the kernel k can be applied within a relative Frobenius
// error tolerance, and returns the candidates it tried and the one it chose.
//
// It computes the higher-order SVD (De Lathauwer, De Moor & Vandewalle, SIAM J. Matrix
// Anal. Appl. 21(4), 2000) for the n-mode singular values and multilinear ranks, then
// tries:
//   - Direct: one multiply-add per non-zero tap;
//   - CP with 1, 2, … opt.MaxCPTerms terms by CPALS (Kolda & Bader, SIAM Review 51(3),
//     2009), R·(kx+ky+kz) multiply-adds per voxel, stopping at the first number of terms
//     that meets the tolerance without degenerating (more terms only cost more). A
//     number of terms whose error is bounded above the tolerance by the discarded
//     n-mode singular values (an R-term sum has multilinear rank at most R in each mode)
//     gets only a short run on the leading (2R+2)-dimensional singular subspaces, for
//     reporting;
//   - Tucker at the ranks of the sequentially truncated HOSVD for the tolerance
//     (Vannieuwenhoven, Vandebril & Meerbergen, SIAM J. Sci. Comput. 34(2), 2012), in
//     both pass orders: r1·kx + r1·r2·ky + r1·r2·kz with x first, r2·ky + r1·r2·kx +
//     r1·r2·kz with y first;
//   - Tucker at the cheapest rank triple, per order, whose truncated HOSVD is within the
//     tolerance, found by trying every triple (the truncation's error is the norm of
//     the core outside the kept block, since the factors are orthonormal).
//
// Every option's error is measured from its plan's reconstruction. Passes along an
// axis of one tap are folded into the others and cost nothing (see Plan.Macs), so a
// flat k×k kernel that is rank one costs 2k. Analyze returns an error if k is empty,
// has dimensions that do not match its data, or holds a NaN or an infinity, or if a
// decomposition fails. The kernel is not modified. An all-zero kernel is planned
// direct, with nothing to do.
func Analyze(k *Dense, opt AnalyzeOptions) (*Analysis, error) {
	if err := checkKernel(k); err != nil {
		return nil, err
	}
	tol := opt.Tolerance
	if tol == 0 {
		tol = DefaultTolerance
	}
	if tol < 0 || math.IsNaN(tol) {
		return nil, fmt.Errorf("tensor: bad tolerance %g", opt.Tolerance)
	}
	maxCP := opt.MaxCPTerms
	if maxCP == 0 {
		maxCP = DefaultMaxCPTerms
	}
	// Every plan refers to one copy of the kernel, so that later changes to k do not
	// reach them.
	k = k.Clone()
	an := &Analysis{Shape: k.Dims(), Norm: k.Norm(), Tolerance: tol, DirectMacs: k.NonZero()}
	an.Options = append(an.Options, Option{Form: Direct, Macs: an.DirectMacs, Plan: &Plan{Form: Direct, Kernel: k}})
	if an.Norm == 0 {
		an.Chosen = &an.Options[0]
		return an, nil
	}
	h, err := HOSVD(k)
	if err != nil {
		return nil, err
	}
	an.ModeSingularValues = h.Values
	an.MultilinearRank = RanksForTolerance(h.Values, an.Norm, tol)
	an.Separable = true
	zero := opt.ExactZero
	if zero <= 0 {
		zero = NumericalZero
	}
	for n := range 3 {
		an.ExactRank[n] = numericalRankAt(h.Values[n], zero)
		an.Separable = an.Separable && an.ExactRank[n] == 1
	}

	// CP with 1, 2, … terms, fitted on the HOSVD core cut where the discarded part is
	// within a tenth of the tolerance (and never beyond the numerical rank), which
	// keeps exact structure exact and noise out of the fit; the short runs on a core
	// cut further (see quickCPRank). Errors are measured against the kernel itself.
	exact := RanksForTolerance(h.Values, an.Norm, tol/10)
	for n := range 3 {
		exact[n] = max(min(exact[n], an.ExactRank[n]), 1)
	}
	for r := 1; r <= maxCP; r++ {
		cpOpt := CPOptions{Restarts: opt.Restarts, Seed: opt.Seed}
		core := exact
		if cpLowerBound(h.Values, an.Norm, r) > tol {
			cpOpt.MaxIter, cpOpt.Restarts, cpOpt.HOSVDStartOnly = quickCPIter, -1, true
			for n := range 3 {
				core[n] = min(core[n], quickCPRank(r))
			}
		}
		cp, err := cpOnCore(k, an.Norm, h.Truncate(core), r, cpOpt.withDefaults())
		if err != nil {
			return nil, fmt.Errorf("CP with %d terms: %w", r, err)
		}
		o := newOption(k, an.Norm, cpPlan(k, cp))
		o.Degenerate, o.Cancellation = cp.Degenerate, cp.Cancellation
		an.Options = append(an.Options, o)
		if !o.Degenerate && o.RelError <= tol {
			break
		}
	}

	// Tucker at the ST-HOSVD ranks, then the cheapest truncations of the HOSVD.
	st, err := STHOSVD(k, tol)
	if err != nil {
		return nil, err
	}
	for _, order := range []Order{XYZ, YXZ} {
		o := newOption(k, an.Norm, tuckerPlan(k, st, order))
		o.Bound = TruncationBound(h.Values, st.Ranks()) / an.Norm
		an.Options = append(an.Options, o)
	}
	search := newRankSearch(h.Core, an.Norm)
	for _, order := range []Order{XYZ, YXZ} {
		r, ok := search.cheapest(k.Dims(), order, tol)
		if !ok || r == st.Ranks() {
			continue
		}
		if tuckerMacs(k.Dims(), r, order) >= tuckerMacs(k.Dims(), st.Ranks(), order) {
			continue
		}
		o := newOption(k, an.Norm, tuckerPlan(k, h.Truncate(r), order))
		o.Bound = TruncationBound(h.Values, r) / an.Norm
		an.Options = append(an.Options, o)
	}

	an.Chosen = choose(an.Options, tol, opt.Force)
	if an.Chosen == nil {
		return nil, fmt.Errorf("tensor: no usable %v plan for this kernel", *opt.Force)
	}
	return an, nil
}

// checkKernel rejects a kernel the analysis cannot work on.
func checkKernel(k *Dense) error {
	if k == nil {
		return errors.New("tensor: nil kernel")
	}
	if k.I <= 0 || k.J <= 0 || k.K <= 0 || len(k.Data) != k.I*k.J*k.K {
		return fmt.Errorf("tensor: kernel of %d×%d×%d with %d values", k.I, k.J, k.K, len(k.Data))
	}
	for n, v := range k.Data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("tensor: kernel value %d is %g", n, v)
		}
	}
	return nil
}

// choose returns the cheapest option within tol that is not degenerate (Direct always
// is); ties go to the simpler form (Direct, then CP, then Tucker), then to the lower
// error. With force set it keeps to that form, falling back to its most accurate
// non-degenerate option.
func choose(opts []Option, tol float64, force *Form) *Option {
	var best *Option
	better := func(o, b *Option) bool {
		if o.Macs != b.Macs {
			return o.Macs < b.Macs
		}
		if o.Form != b.Form {
			return o.Form < b.Form // Direct, then CP, then Tucker
		}
		return o.RelError < b.RelError
	}
	for i := range opts {
		o := &opts[i]
		if o.Degenerate || o.RelError > tol || (force != nil && o.Form != *force) {
			continue
		}
		if best == nil || better(o, best) {
			best = o
		}
	}
	if best != nil || force == nil {
		return best
	}
	for i := range opts {
		o := &opts[i]
		if o.Form == *force && !o.Degenerate && (best == nil || o.RelError < best.RelError) {
			best = o
		}
	}
	return best
}

// newOption describes plan p of kernel k (of norm norm), measuring its true error.
func newOption(k *Dense, norm float64, p *Plan) Option {
	p.RelError = Distance(k, reconstruct(p)) / norm
	return Option{
		Form:     p.Form,
		Terms:    p.Terms(),
		Ranks:    p.Ranks,
		Order:    p.Order,
		RelError: p.RelError,
		Macs:     p.Macs(),
		Plan:     p,
	}
}

// cpLowerBound returns a lower bound on the relative error of any r-term CP fit of a
// tensor of norm norm with n-mode singular values values: each unfolding of an r-term
// sum has rank at most r, so by Eckart–Young its error is at least the norm of the
// discarded singular values of the worst mode.
func cpLowerBound(values [3][]float64, norm float64, r int) float64 {
	worst := 0.0
	for n := range 3 {
		s := 0.0
		for i := r; i < len(values[n]); i++ {
			s += sq(values[n][i] / norm)
		}
		worst = math.Max(worst, s)
	}
	return math.Sqrt(worst)
}

// cpPlan returns the plan of CP fit c of kernel k (which the plan keeps): one branch of one leaf per term, the
// weight folded into the z taps, in order XYZ (the order does not change a CP plan's
// cost).
func cpPlan(k *Dense, c *CPResult) *Plan {
	p := &Plan{Form: CP, Order: XYZ, Kernel: k}
	for r, w := range c.Weights {
		z := mat.Col(nil, r, c.Factors[2])
		for i := range z {
			z[i] *= w
		}
		p.Branches = append(p.Branches, Branch{
			First:  mat.Col(nil, r, c.Factors[0]),
			Leaves: []Leaf{{Second: mat.Col(nil, r, c.Factors[1]), Z: z}},
		})
	}
	foldUnitPasses(p)
	return p
}

// tuckerPlan returns the plan of Tucker decomposition t of kernel k (which the plan
// keeps) in the given order: with XYZ, one branch per x factor column a, each with one
// leaf per y factor column b whose z taps are Σ_c core(a, b, c)·U⁽³⁾(:, c); with YXZ
// the roles of x and y swap.
func tuckerPlan(k *Dense, t *TuckerDecomposition, order Order) *Plan {
	r := t.Ranks()
	p := &Plan{Form: Tucker, Order: order, Kernel: k, Ranks: r}
	first, second := 0, 1
	if order == YXZ {
		first, second = 1, 0
	}
	u3 := make([][]float64, r[2])
	for l := range u3 {
		u3[l] = mat.Col(nil, l, t.Factors[2])
	}
	for a := range r[first] {
		b := Branch{First: mat.Col(nil, a, t.Factors[first])}
		for c := range r[second] {
			z := make([]float64, k.K)
			for l := range r[2] {
				var w float64
				if order == XYZ {
					w = t.Core.At(a, c, l)
				} else {
					w = t.Core.At(c, a, l)
				}
				axpy(w, u3[l], z)
			}
			b.Leaves = append(b.Leaves, Leaf{Second: mat.Col(nil, c, t.Factors[second]), Z: z})
		}
		p.Branches = append(p.Branches, b)
	}
	foldUnitPasses(p)
	return p
}

// foldUnitPasses moves the value of every pass of a single tap into a longer pass of
// the same term, leaving the unit tap [1], which is the identity and costs nothing (see
// Plan.Macs). A z pass of one tap goes into the leaf's second pass, a second pass of
// one tap into z, a first pass of one tap into every leaf of its branch, and a leaf
// whose second and z passes both have one tap into its branch's first pass when it is
// the branch's only leaf. If all three passes have one tap, the value ends in z.
func foldUnitPasses(p *Plan) {
	for bi := range p.Branches {
		b := &p.Branches[bi]
		for li := range b.Leaves {
			l := &b.Leaves[li]
			if len(l.Z) == 1 && len(l.Second) > 1 {
				scale(l.Second, l.Z[0])
				l.Z[0] = 1
			}
			if len(l.Second) == 1 && len(l.Z) > 1 {
				scale(l.Z, l.Second[0])
				l.Second[0] = 1
			}
		}
		if len(b.First) == 1 {
			all := true
			for _, l := range b.Leaves {
				all = all && (len(l.Second) > 1 || len(l.Z) > 1)
			}
			if all {
				for _, l := range b.Leaves {
					if len(l.Second) > 1 {
						scale(l.Second, b.First[0])
					} else {
						scale(l.Z, b.First[0])
					}
				}
				b.First[0] = 1
			} else if len(b.Leaves) == 1 {
				l := &b.Leaves[0]
				l.Z[0] *= b.First[0] * l.Second[0]
				b.First[0], l.Second[0] = 1, 1
			}
		} else if len(b.Leaves) == 1 {
			l := &b.Leaves[0]
			if len(l.Second) == 1 && len(l.Z) == 1 {
				scale(b.First, l.Second[0]*l.Z[0])
				l.Second[0], l.Z[0] = 1, 1
			}
		}
	}
}

func scale(v []float64, a float64) {
	for i := range v {
		v[i] *= a
	}
}

// passMacs is the cost of a pass of n taps: n, except that a pass along an axis of one
// tap costs nothing once foldUnitPasses has made it the identity.
func passMacs(n int) int {
	if n == 1 {
		return 0
	}
	return n
}

// tuckerMacs is the cost model of a Tucker plan of ranks r for a kernel of dimensions d:
// r1·kx + r1·r2·ky + r1·r2·kz with x first, r2·ky + r1·r2·kx + r1·r2·kz with y first,
// where an axis of one tap costs nothing. (A 1×1×1 kernel's plan keeps its one value
// in a z pass that costs 1 unless the value is 1; the model says 0.)
func tuckerMacs(d [3]int, r [3]int, order Order) int {
	if order == XYZ {
		return r[0]*passMacs(d[0]) + r[0]*r[1]*(passMacs(d[1])+passMacs(d[2]))
	}
	return r[1]*passMacs(d[1]) + r[0]*r[1]*(passMacs(d[0])+passMacs(d[2]))
}

// rankSearch finds the cheapest truncation of a full HOSVD within an error. The error of
// the truncation to rank r is the norm of the core outside its leading r0×r1×r2 block,
// the factors having orthonormal columns; a 3D prefix sum of the squared core gives the
// kept part of every block at once.
type rankSearch struct {
	d     [3]int    // core dimensions
	total float64   // ‖core/scale‖²
	pre   []float64 // pre[a + (d0+1)·(b + (d1+1)·c)] = Σ (core/scale)² over the leading a×b×c block
}

// newRankSearch prepares the search on a full HOSVD core, with errors measured relative
// to scale (the kernel's norm, which keeps the squares in range).
func newRankSearch(core *Dense, scale float64) *rankSearch {
	d := core.Dims()
	s := &rankSearch{d: d, pre: make([]float64, (d[0]+1)*(d[1]+1)*(d[2]+1))}
	at := func(a, b, c int) int { return a + (d[0]+1)*(b+(d[1]+1)*c) }
	for c := 1; c <= d[2]; c++ {
		for b := 1; b <= d[1]; b++ {
			for a := 1; a <= d[0]; a++ {
				v := sq(core.At(a-1, b-1, c-1) / scale)
				s.total += v
				s.pre[at(a, b, c)] = v +
					s.pre[at(a-1, b, c)] + s.pre[at(a, b-1, c)] + s.pre[at(a, b, c-1)] -
					s.pre[at(a-1, b-1, c)] - s.pre[at(a-1, b, c-1)] - s.pre[at(a, b-1, c-1)] +
					s.pre[at(a-1, b-1, c-1)]
			}
		}
	}
	return s
}

// cheapest returns the rank triple of least tuckerMacs whose relative truncation error
// is at most maxErr (ties to the smaller error), and whether one exists.
func (s *rankSearch) cheapest(kd [3]int, order Order, maxErr float64) ([3]int, bool) {
	d := s.d
	limit := sq(maxErr)
	best, bestMacs, bestErr := [3]int{}, math.MaxInt, math.Inf(1)
	for c := 1; c <= d[2]; c++ {
		for b := 1; b <= d[1]; b++ {
			for a := 1; a <= d[0]; a++ {
				r := [3]int{a, b, c}
				m := tuckerMacs(kd, r, order)
				if m > bestMacs {
					continue
				}
				e := math.Max(s.total-s.pre[a+(d[0]+1)*(b+(d[1]+1)*c)], 0)
				if e > limit {
					continue
				}
				if m < bestMacs || e < bestErr {
					best, bestMacs, bestErr = r, m, e
				}
			}
		}
	}
	return best, bestMacs != math.MaxInt
}

// reconstruct returns the kernel plan p applies, the same tensor as p.Reconstruct() but
// summed branch by branch: the leaves of a branch first make one matrix over the second
// in-plane axis and z, which the branch's first taps then spread along its axis. This
// keeps the error measurement of large Tucker plans cheap.
func reconstruct(p *Plan) *Dense {
	if p.Form == Direct {
		return p.Kernel.Clone()
	}
	d := p.Kernel.Dims()
	out := New(d[0], d[1], d[2])
	first, second := d[0], d[1]
	if p.Order == YXZ {
		first, second = d[1], d[0]
	}
	m := make([]float64, second*d[2])
	for _, b := range p.Branches {
		for i := range m {
			m[i] = 0
		}
		for _, l := range b.Leaves {
			for k, z := range l.Z {
				axpy(z, l.Second, m[second*k:second*k+second])
			}
		}
		// Innermost loops run along x, contiguous in out.
		for k := range d[2] {
			if p.Order == XYZ {
				for s := range second {
					if v := m[s+second*k]; v != 0 {
						off := d[0] * (s + d[1]*k)
						axpy(v, b.First, out.Data[off:off+first])
					}
				}
			} else {
				for f, w := range b.First {
					if w != 0 {
						off := d[0] * (f + d[1]*k)
						axpy(w, m[second*k:second*k+second], out.Data[off:off+second])
					}
				}
			}
		}
	}
	return out
}
