package tensor

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// CPOptions controls CPALS. The zero value asks for the defaults.
type CPOptions struct {
	// MaxIter caps the sweeps of one run (each sweep updates all three factors).
	// Default 1000.
	MaxIter int
	// Tol ends a run when a sweep changes the relative error by no more than
	// Tol·(relative error): the fit has stopped moving. Default 1e-10.
	Tol float64
	// Restarts is the number of runs from random factors, in addition to the runs
	// started from the generalised-eigenvalue solution, the higher-order SVD and the
	// unfoldings' largest columns. Negative means none. Default 4.
	Restarts int
	// Seed seeds the PCG generator (math/rand/v2) of the random starts, so that results
	// are reproducible. Runs with the same seed give the same result.
	Seed uint64
	// HOSVDStartOnly runs ALS once, from the HOSVD start, for a quick estimate.
	HOSVDStartOnly bool
	// DegenerateRatio is the multiple of ‖a‖ above which the sum of the term norms
	// Σ|λ_r| marks a fit as degenerate. Default 10 (see CPResult.Degenerate).
	DegenerateRatio float64
}

const (
	defaultCPMaxIter  = 1000
	defaultCPTol      = 1e-10
	defaultCPRestarts = 4
	// DefaultDegenerateRatio is the default CPOptions.DegenerateRatio. A plan whose terms
	// sum to ten times the kernel's norm loses about one decimal digit to cancellation;
	// the degenerate fits of de Silva & Lim (2008) go far beyond it as they improve.
	DefaultDegenerateRatio = 10
	// degenerateCongruence: two terms whose congruence is below its negative nearly
	// cancel. Two well separated terms of a kernel (a difference of Gaussians with a
	// sigma ratio of 1.6, say) stay above it while ALS still moves; the 2-term fits of
	// the Laplacian stencil fall below it within a hundred sweeps.
	degenerateCongruence = 0.8
	// blatantDegeneracy: a run whose terms sum to this many times DegenerateRatio·‖a‖
	// is stopped early, since it can only end degenerate.
	blatantDegeneracy = 10
	// exactFit is the relative error below which a run stops as exact: a few units of
	// float64 rounding in a sum of terms.
	exactFit = 1e-14
	// pcgStream is the second PCG seed word, fixed so that Seed alone picks the stream.
	pcgStream = 0x9e3779b97f4a7c15
)

func (o CPOptions) withDefaults() CPOptions {
	if o.MaxIter <= 0 {
		o.MaxIter = defaultCPMaxIter
	}
	if o.Tol <= 0 {
		o.Tol = defaultCPTol
	}
	if o.Restarts == 0 {
		o.Restarts = defaultCPRestarts
	} else if o.Restarts < 0 {
		o.Restarts = 0
	}
	if o.DegenerateRatio <= 0 {
		o.DegenerateRatio = DefaultDegenerateRatio
	}
	return o
}

// A CPResult is a sum of R rank-one terms Σ_r Weights[r]·x_r∘y_r∘z_r, where x_r, y_r and
// z_r are column r of Factors[0], Factors[1] and Factors[2], each of unit norm. Terms are
// sorted by decreasing |Weights[r]|.
type CPResult struct {
	Weights []float64
	Factors [3]*mat.Dense
	// RelError is ‖a − Σ terms‖ / ‖a‖, computed from the reconstructed sum.
	RelError float64
	// Iterations is the number of sweeps of the run that was kept; Converged says whether
	// that run met the convergence rule before the iteration cap.
	Iterations int
	Converged  bool
	// MaxTermNorm is max_r |λ_r| / ‖a‖ and Cancellation is Σ_r |λ_r| / ‖a‖: for a fit
	// whose terms do not cancel, Cancellation is at most about √R.
	MaxTermNorm, Cancellation float64
	// Congruence is the most negative signed congruence of two terms p and q:
	// sign(λ_p λ_q)·Π_n ⟨a⁽ⁿ⁾_p, a⁽ⁿ⁾_q⟩, the product over the three modes of the cosines
	// between their factors. It nears −1 when two terms point the same way and cancel
	// (common practice as a degeneracy diagnostic). It is 1 for a single term.
	Congruence float64
	// Degenerate marks a fit whose terms diverge and cancel. A best rank-R
	// approximation need not exist, and then ALS drifts along a sequence of ever better
	// fits whose terms grow without bound and cancel, converging towards a tensor of
	// higher rank (V. de Silva, L.-H. Lim, "Tensor rank and the ill-posedness of the best
	// low-rank approximation problem", SIAM J. Matrix Anal. Appl. 30(3):1084–1127, 2008).
	// A fit is marked degenerate when its Cancellation exceeds
	// CPOptions.DegenerateRatio, or when its run never converged, its term norms were
	// still growing while its error fell over the second half of the run, and two of
	// its terms nearly cancel (Congruence below −0.8): the early signature of such a
	// drift. A degenerate fit loses digits to cancellation in float32 filtering, and the
	// planner never offers it.
	Degenerate bool
}

// Terms returns R, the number of rank-one terms.
func (c *CPResult) Terms() int { return len(c.Weights) }

// Reconstruct returns Σ_r Weights[r]·x_r∘y_r∘z_r.
func (c *CPResult) Reconstruct() *Dense {
	var d [3]int
	for n := range 3 {
		d[n], _ = c.Factors[n].Dims()
	}
	out := New(d[0], d[1], d[2])
	for r, w := range c.Weights {
		out.AddScaled(1, Outer(w, mat.Col(nil, r, c.Factors[0]), mat.Col(nil, r, c.Factors[1]), mat.Col(nil, r, c.Factors[2])))
	}
	return out
}

// CPALS fits a with r rank-one terms by alternating least squares (T. G. Kolda,
// B. W. Bader, "Tensor decompositions and applications", SIAM Review 51(3):455–500,
// 2009, §3.4): each sweep updates the factor of every mode in turn to
// A⁽ⁿ⁾ ← a₍ₙ₎ (Khatri–Rao product of the other factors) V†, with V the Hadamard product
// of the other factors' Gram matrices, and normalises its columns into the weights.
//
// To save work the fit runs on the core of a, compressed by the sequentially truncated
// HOSVD to its numerical multilinear rank, and the factors are mapped back afterwards
// (compression first, as Kolda & Bader describe for CANDELINC); this loses nothing,
// because the factors of a best fit lie in the column spaces of a's unfoldings. Runs
// start from an exact generalised-eigenvalue solution when r is at most two of the
// core's dimensions (see gevdStart; exact for a tensor of CP rank r with generic
// factors), from the leading left singular vectors of the core's unfoldings (the HOSVD
// start), from the unfoldings' largest columns, and from opt.Restarts random factors;
// the run with the lowest error is kept, and an exact run ends the search. A run stops when the relative error changes
// by no more than opt.Tol relative to itself, falls below 1e-14 (times the sum of the
// term norms over ‖a‖ when that exceeds 1: the rounding floor of a cancelling sum), or
// reaches opt.MaxIter sweeps; a run whose term norms sum to more than ten times
// opt.DegenerateRatio·‖a‖ is abandoned as degenerate.
//
// ALS may stop in a swamp or a local minimum; more restarts make that less likely. For
// a tensor of CP rank above r whose border rank is at most r, the fit degenerates and
// is marked so (see CPResult.Degenerate). The input is not modified.
func CPALS(a *Dense, r int, opt CPOptions) (*CPResult, error) {
	if r < 1 {
		return nil, fmt.Errorf("tensor: CP with %d terms", r)
	}
	opt = opt.withDefaults()
	norm := a.Norm()
	if norm == 0 {
		return nil, errors.New("tensor: CP of a zero tensor")
	}
	comp, err := STHOSVD(a, 0)
	if err != nil {
		return nil, err
	}
	return cpOnCore(a, norm, comp, r, opt)
}

// cpOnCore runs CPALS on the core of comp, a Tucker decomposition of a (of norm norm)
// with orthonormal factors, and maps the fit back. opt must have its defaults set.
func cpOnCore(a *Dense, norm float64, comp *TuckerDecomposition, r int, opt CPOptions) (*CPResult, error) {
	x := comp.Core.Clone()
	for i := range x.Data {
		x.Data[i] /= norm
	}
	rng := rand.New(rand.NewPCG(opt.Seed, pcgStream))
	starts := []func() ([3][][]float64, error){
		func() ([3][][]float64, error) { return gevdStart(x, r, rng) },
		func() ([3][][]float64, error) { return hosvdStart(x, r, rng) },
		func() ([3][][]float64, error) { return columnStart(x, r, rng), nil },
	}
	if opt.HOSVDStartOnly {
		starts = starts[1:2]
	}
	for range opt.Restarts {
		starts = append(starts, func() ([3][][]float64, error) { return randomStart(x.Dims(), r, rng), nil })
	}
	var best *alsRun
	for _, start := range starts {
		f, err := start()
		if err != nil {
			return nil, err
		}
		if f[0] == nil {
			continue // this start does not apply to x
		}
		run := runALS(x, f, opt)
		if best == nil || run.err < best.err {
			best = run
		}
		if best.err <= exactFit {
			break
		}
	}
	res := expand(best, comp, norm)
	res.RelError = Distance(a, res.Reconstruct()) / norm
	res.Iterations, res.Converged = best.iter, best.converged
	for _, w := range res.Weights {
		res.MaxTermNorm = math.Max(res.MaxTermNorm, math.Abs(w)/norm)
		res.Cancellation += math.Abs(w) / norm
	}
	res.Congruence = congruence(res)
	res.Degenerate = res.Cancellation > opt.DegenerateRatio ||
		(best.diverging && res.Congruence < -degenerateCongruence)
	return res, nil
}

// alsRun is the state of one ALS run on the normalised compressed core: factor columns
// f[n][r] of unit norm and weights w.
type alsRun struct {
	f         [3][][]float64
	w         []float64
	err       float64
	iter      int
	converged bool
	// diverging: Σ|w| rose and the error fell, both by more than 1e-4 relative, over
	// the second half of a run that hit the iteration cap.
	diverging bool
}

func runALS(x *Dense, f [3][][]float64, opt CPOptions) *alsRun {
	d := x.Dims()
	r := len(f[0])
	for n := range 3 {
		for _, c := range f[n] {
			normalize(c)
		}
	}
	run := &alsRun{f: f, w: make([]float64, r), err: math.Inf(1)}
	xnorm2 := sq(x.Norm())
	midSum, midErr := 0.0, 0.0
	m := make([][]float64, r)
	v := mat.NewSymDense(r, nil)
	var eig mat.EigenSym
	pinv := mat.NewDense(r, r, nil)
	chol := make([]float64, r*r)
	for it := 1; it <= opt.MaxIter; it++ {
		for n := range 3 {
			for c := range m {
				m[c] = resize(m[c], d[n])
			}
			mttkrp(m, x, f, n)
			// V = ∗_{k≠n} F⁽ᵏ⁾ᵀF⁽ᵏ⁾, symmetric positive semidefinite.
			for p := range r {
				for q := p; q < r; q++ {
					g := 1.0
					for k := range 3 {
						if k != n {
							g *= dot(f[k][p], f[k][q])
						}
					}
					v.SetSym(p, q, g)
				}
			}
			if !cholInverse(pinv, v, chol) {
				symPinv(pinv, v, &eig)
			}
			// F⁽ⁿ⁾ = M V†, column by column.
			for q := range r {
				col := f[n][q]
				for i := range col {
					col[i] = 0
				}
				for p := range r {
					axpy(pinv.At(p, q), m[p], col)
				}
				run.w[q] = normalize(col)
			}
		}
		// ‖x − model‖² = ‖x‖² − 2⟨x, model⟩ + ‖model‖², with ⟨x, model⟩ from the last
		// MTTKRP (taken before the update of mode 2, against the other two factors).
		inner, model2 := 0.0, 0.0
		for p := range r {
			inner += run.w[p] * dot(m[p], f[2][p])
			for q := range r {
				model2 += run.w[p] * run.w[q] * dot(f[0][p], f[0][q]) * dot(f[1][p], f[1][q]) * dot(f[2][p], f[2][q])
			}
		}
		e2 := xnorm2 - 2*inner + model2
		if e2 < 1e-10*xnorm2 {
			// The expansion cancels to a few digits here: measure directly.
			e2 = sq(residual(x, f, run.w))
		}
		e := math.Sqrt(math.Max(e2, 0)) / math.Sqrt(xnorm2)
		prev := run.err
		run.err, run.iter = e, it
		// Exact to rounding: a sum of terms carries rounding errors of a few units of
		// float64 times the sum of the term norms, which cancellation makes larger
		// than the result.
		if e <= exactFit*math.Max(1, sumAbs(run.w)/math.Sqrt(xnorm2)) || math.Abs(prev-e) <= opt.Tol*e {
			run.converged = true
			break
		}
		if sumAbs(run.w) > blatantDegeneracy*opt.DegenerateRatio*math.Sqrt(xnorm2) {
			break // the terms already diverge far past the degeneracy mark
		}
		if it == opt.MaxIter/2 {
			midSum, midErr = sumAbs(run.w), e
		}
	}
	if !run.converged && midSum > 0 {
		// A real drift moves both by far more than 1e-4 over half a run; rounding noise
		// at an exact fit does not.
		run.diverging = sumAbs(run.w) > midSum*(1+1e-4) && run.err < midErr*(1-1e-4)
	}
	return run
}

func sumAbs(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += math.Abs(x)
	}
	return s
}

// congruence returns the most negative signed congruence between two terms of c (see
// CPResult.Congruence).
func congruence(c *CPResult) float64 {
	worst := 1.0
	for p := range c.Terms() {
		for q := p + 1; q < c.Terms(); q++ {
			v := math.Copysign(1, c.Weights[p]*c.Weights[q])
			for n := range 3 {
				v *= mat.Dot(c.Factors[n].ColView(p), c.Factors[n].ColView(q))
			}
			worst = math.Min(worst, v)
		}
	}
	return worst
}

// mttkrp sets m[r] (length d[n]) to column r of x₍ₙ₎ (Khatri–Rao of the other factors):
// m[r][i_n] = Σ over the other two indices of x·(their factors' column r).
func mttkrp(m [][]float64, x *Dense, f [3][][]float64, n int) {
	I, J, K := x.I, x.J, x.K
	for _, c := range m {
		for i := range c {
			c[i] = 0
		}
	}
	for k := range K {
		for j := range J {
			fib := x.Data[I*(j+J*k) : I*(j+J*k)+I]
			for r := range m {
				switch n {
				case 0:
					axpy(f[1][r][j]*f[2][r][k], fib, m[r])
				case 1:
					m[r][j] += dot(fib, f[0][r]) * f[2][r][k]
				default:
					m[r][k] += dot(fib, f[0][r]) * f[1][r][j]
				}
			}
		}
	}
}

// residual returns ‖x − Σ_r w_r f0_r∘f1_r∘f2_r‖.
func residual(x *Dense, f [3][][]float64, w []float64) float64 {
	res := x.Clone()
	for r := range w {
		res.AddScaled(-1, Outer(w[r], f[0][r], f[1][r], f[2][r]))
	}
	return res.Norm()
}

// cholInverse sets dst to v⁻¹ by a Cholesky factorisation in the scratch l (r×r) and
// reports whether v is safely positive definite: every pivot above 1e-6 of the
// largest diagonal entry, so that the inverse loses at most about six digits. Otherwise dst
// is left undefined and the caller falls back to the pseudo-inverse.
func cholInverse(dst *mat.Dense, v *mat.SymDense, l []float64) bool {
	r := v.SymmetricDim()
	top := 0.0
	for i := range r {
		top = math.Max(top, v.At(i, i))
	}
	for j := range r {
		d := v.At(j, j)
		for k := range j {
			d -= l[j*r+k] * l[j*r+k]
		}
		if d <= 1e-6*top {
			return false
		}
		d = math.Sqrt(d)
		l[j*r+j] = d
		for i := j + 1; i < r; i++ {
			s := v.At(i, j)
			for k := range j {
				s -= l[i*r+k] * l[j*r+k]
			}
			l[i*r+j] = s / d
		}
	}
	// Column c of v⁻¹ solves L·Lᵀ·x = e_c.
	x := make([]float64, r)
	for c := range r {
		for i := range r {
			s := 0.0
			if i == c {
				s = 1
			}
			for k := range i {
				s -= l[i*r+k] * x[k]
			}
			x[i] = s / l[i*r+i]
		}
		for i := r - 1; i >= 0; i-- {
			s := x[i]
			for k := i + 1; k < r; k++ {
				s -= l[k*r+i] * x[k]
			}
			x[i] = s / l[i*r+i]
		}
		for i := range r {
			dst.Set(i, c, x[i])
		}
	}
	return true
}

// symPinv sets dst to the pseudo-inverse of the symmetric matrix v, dropping
// eigenvalues below 1e-14 of the largest (about 100 units of float64 rounding).
func symPinv(dst *mat.Dense, v *mat.SymDense, eig *mat.EigenSym) {
	r := v.SymmetricDim()
	dst.Zero()
	if !eig.Factorize(v, true) {
		return
	}
	vals := eig.Values(nil)
	var q mat.Dense
	eig.VectorsTo(&q)
	top := 0.0
	for _, l := range vals {
		top = math.Max(top, math.Abs(l))
	}
	for e, l := range vals {
		if l <= 1e-14*top {
			continue
		}
		for i := range r {
			for j := range r {
				dst.Set(i, j, dst.At(i, j)+q.At(i, e)*q.At(j, e)/l)
			}
		}
	}
}

// gevdStart computes an exact decomposition when x has CP rank r and r does not exceed
// two of its dimensions, by the generalised eigenvalue method of Jennrich (R. A.
// Harshman, UCLA Working Papers in Phonetics 16, 1970; S. E. Leurgans, R. T. Ross,
// R. B. Abel, SIAM J. Matrix Anal. Appl. 14(4):1064–1083, 1993; citations from memory):
// with x compressed to r×r along those two modes, two random combinations Xa and Xb of
// the slices along the third share the factors, Xa = A·Da·Bᵀ and Xb = A·Db·Bᵀ, so the
// eigenvectors of Xa·Xb⁻¹ are the columns of A. The other two factors follow from rank-one
// SVDs of the rows of A†·x₍ₙ₎. Complex eigenvectors are replaced by their real parts: the
// result is only a start for ALS. It returns zero factors (f[0] == nil) when no mode
// arrangement fits or the pencil is singular.
func gevdStart(x *Dense, r int, rng *rand.Rand) ([3][][]float64, error) {
	d := x.Dims()
	var none [3][][]float64
	if r < 2 {
		return none, nil // the HOSVD start is exact for one term
	}
	for m := 2; m >= 0; m-- {
		p, q := (m+1)%3, (m+2)%3
		if p > q {
			p, q = q, p
		}
		if d[m] < 2 || d[p] < r || d[q] < r {
			continue
		}
		f, ok, err := gevd(x, [3]int{p, q, m}, r, rng)
		if err != nil || ok {
			return f, err
		}
	}
	return none, nil
}

// gevd runs the generalised eigenvalue start with modes perm[0] and perm[1] compressed
// to r and the pencil taken along mode perm[2].
func gevd(x *Dense, perm [3]int, r int, rng *rand.Rand) ([3][][]float64, bool, error) {
	var f [3][][]float64
	y := permute(x, perm)
	dy := y.Dims()
	var u [2]*mat.Dense
	for n := range 2 {
		un, _, err := leftSingular(Unfold(nil, y, n))
		if err != nil {
			return f, false, err
		}
		u[n] = mat.DenseCopyOf(un.Slice(0, dy[n], 0, r))
	}
	core := ModeProduct(ModeProduct(y, 0, u[0].T()), 1, u[1].T())
	xa, xb := mat.NewDense(r, r, nil), mat.NewDense(r, r, nil)
	for k := range dy[2] {
		a, b := rng.NormFloat64(), rng.NormFloat64()
		for i := range r {
			for j := range r {
				v := core.At(i, j, k)
				xa.Set(i, j, xa.At(i, j)+a*v)
				xb.Set(i, j, xb.At(i, j)+b*v)
			}
		}
	}
	// M = Xa·Xb⁻¹, from Xbᵀ·Mᵀ = Xaᵀ.
	var mt mat.Dense
	if err := mt.Solve(xb.T(), xa.T()); err != nil {
		return f, false, nil
	}
	var eig mat.Eigen
	if !eig.Factorize(mt.T(), mat.EigenRight) {
		return f, false, nil
	}
	var vec mat.CDense
	eig.VectorsTo(&vec)
	ev := mat.NewDense(r, r, nil)
	for i := range r {
		for j := range r {
			ev.Set(i, j, real(vec.At(i, j)))
		}
	}
	var a mat.Dense
	a.Mul(u[0], ev)
	// Rows of A†·y₍₀₎ are λ_r·vec(b_r c_rᵀ): split each by a rank-one SVD.
	var g mat.Dense
	if err := g.Solve(&a, Unfold(nil, y, 0)); err != nil {
		return f, false, nil
	}
	var out [3][][]float64
	for n := range 3 {
		out[n] = make([][]float64, r)
	}
	for t := range r {
		out[0][t] = mat.Col(nil, t, &a)
		bc := mat.NewDense(dy[1], dy[2], nil)
		for k := range dy[2] {
			for j := range dy[1] {
				bc.Set(j, k, g.At(t, j+dy[1]*k))
			}
		}
		var svd mat.SVD
		if !svd.Factorize(bc, mat.SVDThin) {
			return f, false, nil
		}
		var ub, vb mat.Dense
		svd.UTo(&ub)
		svd.VTo(&vb)
		out[1][t] = mat.Col(nil, 0, &ub)
		out[2][t] = mat.Col(nil, 0, &vb)
	}
	// Back to x's mode order: y's mode n is x's mode perm[n].
	for n := range 3 {
		f[perm[n]] = out[n]
	}
	return f, true, nil
}

// permute returns the tensor y with y's mode n being t's mode perm[n].
func permute(t *Dense, perm [3]int) *Dense {
	d := t.Dims()
	y := New(d[perm[0]], d[perm[1]], d[perm[2]])
	var idx [3]int
	n := 0
	for idx[2] = 0; idx[2] < d[2]; idx[2]++ {
		for idx[1] = 0; idx[1] < d[1]; idx[1]++ {
			for idx[0] = 0; idx[0] < d[0]; idx[0]++ {
				y.Set(idx[perm[0]], idx[perm[1]], idx[perm[2]], t.Data[n])
				n++
			}
		}
	}
	return y
}

// hosvdStart takes the leading left singular vectors of each unfolding of x; when r
// exceeds the mode's rank the remaining columns are random.
func hosvdStart(x *Dense, r int, rng *rand.Rand) ([3][][]float64, error) {
	var f [3][][]float64
	for n := range 3 {
		u, _, err := leftSingular(Unfold(nil, x, n))
		if err != nil {
			return f, err
		}
		_, c := u.Dims()
		f[n] = make([][]float64, r)
		for q := range r {
			if q < c {
				f[n][q] = mat.Col(nil, q, u)
			} else {
				f[n][q] = randomVector(x.Dims()[n], rng)
			}
		}
	}
	return f, nil
}

// columnStart takes, per mode, the r columns of the unfolding with the largest norms,
// padding with random columns if the unfolding has fewer.
func columnStart(x *Dense, r int, rng *rand.Rand) [3][][]float64 {
	var f [3][][]float64
	for n := range 3 {
		u := Unfold(nil, x, n)
		rows, cols := u.Dims()
		idx := make([]int, cols)
		norms := make([]float64, cols)
		for c := range cols {
			idx[c] = c
			norms[c] = mat.Norm(u.ColView(c), 2)
		}
		sort.SliceStable(idx, func(p, q int) bool { return norms[idx[p]] > norms[idx[q]] })
		f[n] = make([][]float64, r)
		for q := range r {
			if q < cols && norms[idx[q]] > 0 {
				f[n][q] = mat.Col(nil, idx[q], u)
			} else {
				f[n][q] = randomVector(rows, rng)
			}
		}
	}
	return f
}

func randomStart(d [3]int, r int, rng *rand.Rand) [3][][]float64 {
	var f [3][][]float64
	for n := range 3 {
		f[n] = make([][]float64, r)
		for q := range r {
			f[n][q] = randomVector(d[n], rng)
		}
	}
	return f
}

func randomVector(n int, rng *rand.Rand) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	return v
}

// expand maps a run on the compressed, normalised core back to a's space: factor n
// becomes U⁽ⁿ⁾·F⁽ⁿ⁾ (unit columns stay unit, U⁽ⁿ⁾ having orthonormal columns) and the
// weights are scaled by ‖a‖. Terms are sorted by decreasing |weight|, and each factor
// column's largest entry is made positive, its sign moved into the weight.
func expand(run *alsRun, comp *TuckerDecomposition, norm float64) *CPResult {
	r := len(run.w)
	order := make([]int, r)
	for i := range order {
		order[i] = i
	}
	sort.SliceStable(order, func(p, q int) bool { return math.Abs(run.w[order[p]]) > math.Abs(run.w[order[q]]) })
	res := &CPResult{Weights: make([]float64, r)}
	for n := range 3 {
		res.Factors[n] = mat.NewDense(nrows(comp.Factors[n]), r, nil)
	}
	for p, q := range order {
		w := run.w[q] * norm
		for n := range 3 {
			col := make([]float64, nrows(comp.Factors[n]))
			u := comp.Factors[n]
			for i := range col {
				s := 0.0
				for c, fc := range run.f[n][q] {
					s += u.At(i, c) * fc
				}
				col[i] = s
			}
			big := 0
			for i, v := range col {
				if math.Abs(v) > math.Abs(col[big]) {
					big = i
				}
			}
			if col[big] < 0 {
				w = -w
				for i := range col {
					col[i] = -col[i]
				}
			}
			res.Factors[n].SetCol(p, col)
		}
		res.Weights[p] = w
	}
	return res
}

func nrows(m *mat.Dense) int { r, _ := m.Dims(); return r }

func resize(s []float64, n int) []float64 {
	if cap(s) < n {
		return make([]float64, n)
	}
	return s[:n]
}

func dot(a, b []float64) float64 {
	b = b[:len(a)]
	s := 0.0
	for i, v := range a {
		s += v * b[i]
	}
	return s
}

func axpy(alpha float64, x, y []float64) {
	y = y[:len(x)]
	for i, v := range x {
		y[i] += alpha * v
	}
}

// normalize scales v to unit norm and returns its former norm (0 leaves v unchanged).
func normalize(v []float64) float64 {
	n := math.Sqrt(dot(v, v))
	if n > 0 {
		for i := range v {
			v[i] /= n
		}
	}
	return n
}
