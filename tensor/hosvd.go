package tensor

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// NumericalZero is the relative threshold below which a singular value counts as zero
// in statements about exact rank: σ ≤ NumericalZero·σ_max is treated as 0. Kernels
// built in float64 carry rounding errors of a few units of 2⁻⁵³ ≈ 1.1e-16 relative to
// their norm, and kernels read from float32 files about 6e-8; 1e-12 sits well above the
// first and lets a kernel whose structure is exact in float64 be called exact, while a
// float32 kernel is only called exact up to its own precision by the tolerance rule.
const NumericalZero = 1e-12

// ErrNoConvergence is returned when a singular value decomposition fails to converge.
var ErrNoConvergence = errors.New("tensor: singular value decomposition did not converge")

// A TuckerDecomposition is A ≈ Core ×₀ Factors[0] ×₁ Factors[1] ×₂ Factors[2], as produced
// by the higher-order SVD and its truncations. Each factor has orthonormal columns, one
// per index of the core along its mode.
//
// The higher-order SVD of L. De Lathauwer, B. De Moor and J. Vandewalle, "A multilinear
// singular value decomposition", SIAM J. Matrix Anal. Appl. 21(4):1253–1278, 2000, takes
// Factors[n] as the left singular vectors of the mode-n unfolding A₍ₙ₎ and the core as
// S = A ×₀ U₀ᵀ ×₁ U₁ᵀ ×₂ U₂ᵀ. Its core is all-orthogonal (two different slices along
// one mode are orthogonal) and ordered (the norms of the slices along mode n are the
// n-mode singular values, in non-increasing order) (Theorem 2 of that paper).
type TuckerDecomposition struct {
	Factors [3]*mat.Dense
	Core    *Dense
	// Values holds, per mode, the singular values (descending) of the unfolding the
	// mode's factor was taken from. For the higher-order SVD and its truncations they are
	// the n-mode singular values of the decomposed tensor, all of them. For the
	// sequentially truncated HOSVD they are those of the partly truncated core at that
	// step, which equal the n-mode singular values only for the first mode processed.
	Values [3][]float64
}

// Ranks returns the multilinear rank of the decomposition: the core's dimensions.
func (t *TuckerDecomposition) Ranks() [3]int { return t.Core.Dims() }

// Reconstruct returns the tensor the decomposition stands for,
// Core ×₀ Factors[0] ×₁ Factors[1] ×₂ Factors[2].
func (t *TuckerDecomposition) Reconstruct() *Dense {
	a := t.Core
	for n := 0; n < 3; n++ {
		a = ModeProduct(a, n, t.Factors[n])
	}
	return a
}

// Truncate returns the decomposition cut to multilinear rank r: the leading r[n] columns
// of each factor and the leading r[0]×r[1]×r[2] block of the core. Applied to a full
// higher-order SVD this is the truncated HOSVD of De Lathauwer et al. (2000), whose
// squared error is at most the sum over the modes of the discarded squared n-mode
// singular values (see TruncationBound). The receiver is not modified. Truncate panics
// if a rank is below 1 or above the current rank in its mode.
func (t *TuckerDecomposition) Truncate(r [3]int) *TuckerDecomposition {
	d := t.Ranks()
	for n := range 3 {
		if r[n] < 1 || r[n] > d[n] {
			panic(fmt.Sprintf("tensor: Truncate to rank %v of a rank %v decomposition", r, d))
		}
	}
	out := &TuckerDecomposition{Core: leading(t.Core, r[0], r[1], r[2]), Values: t.Values}
	for n := range 3 {
		rows, _ := t.Factors[n].Dims()
		out.Factors[n] = mat.DenseCopyOf(t.Factors[n].Slice(0, rows, 0, r[n]))
	}
	return out
}

// leftSingular returns the thin left singular vectors and the singular values
// (descending) of m.
func leftSingular(m *mat.Dense) (*mat.Dense, []float64, error) {
	var svd mat.SVD
	if !svd.Factorize(m, mat.SVDThinU) {
		return nil, nil, ErrNoConvergence
	}
	var u mat.Dense
	svd.UTo(&u)
	return &u, svd.Values(nil), nil
}

// HOSVD returns the full higher-order singular value decomposition of a (De Lathauwer,
// De Moor & Vandewalle, SIAM J. Matrix Anal. Appl. 21(4):1253–1278, 2000): the factor
// of mode n holds the left singular vectors of the unfolding a₍ₙ₎ computed by gonum's
// mat.SVD, the core is a ×₀ U₀ᵀ ×₁ U₁ᵀ ×₂ U₂ᵀ, and Values holds every n-mode singular
// value. A mode whose unfolding has fewer columns than rows (a mode longer than the
// product of the other two) keeps only as many factor columns as the unfolding has
// singular values, so the core may be smaller than a; the decomposition is still exact.
// The input is not modified.
func HOSVD(a *Dense) (*TuckerDecomposition, error) {
	h := &TuckerDecomposition{}
	for n := range 3 {
		u, s, err := leftSingular(Unfold(nil, a, n))
		if err != nil {
			return nil, fmt.Errorf("mode %d: %w", n, err)
		}
		h.Factors[n], h.Values[n] = u, s
	}
	core := a
	for n := range 3 {
		core = ModeProduct(core, n, h.Factors[n].T())
	}
	h.Core = core
	return h, nil
}

// STHOSVD returns the sequentially truncated higher-order SVD of a (N. Vannieuwenhoven,
// R. Vandebril, K. Meerbergen, "A new truncation strategy for the higher-order singular
// value decomposition", SIAM J. Sci. Comput. 34(2):A1027–A1052, 2012). Modes are
// processed in the order 0, 1, 2: the factor of each mode comes from the SVD of the
// unfolding of the already shrunk core, which is projected onto it before the next
// mode. In each mode the rank is the smallest whose discarded squared singular values
// sum to at most tol²‖a‖²/3, the paper's rule that guarantees a relative Frobenius error
// of at most tol. A tol of 0 keeps the numerical rank (see NumericalRank). The input is
// not modified.
func STHOSVD(a *Dense, tol float64) (*TuckerDecomposition, error) {
	if tol < 0 || math.IsNaN(tol) {
		return nil, fmt.Errorf("tensor: bad tolerance %g", tol)
	}
	norm := a.Norm()
	return stHOSVD(a, func(_ int, s []float64) int {
		if tol == 0 || norm == 0 {
			return max(NumericalRank(s), 1)
		}
		return rankWithin(s, norm, tol*tol/3)
	})
}

// STHOSVDRanks is STHOSVD with the multilinear rank given. Ranks above a mode's size are
// reduced to it; ranks below 1 are an error.
func STHOSVDRanks(a *Dense, r [3]int) (*TuckerDecomposition, error) {
	for n := range 3 {
		if r[n] < 1 {
			return nil, fmt.Errorf("tensor: bad rank %v", r)
		}
	}
	return stHOSVD(a, func(n int, s []float64) int { return min(r[n], len(s)) })
}

func stHOSVD(a *Dense, rank func(mode int, s []float64) int) (*TuckerDecomposition, error) {
	h := &TuckerDecomposition{}
	core := a
	for n := range 3 {
		u, s, err := leftSingular(Unfold(nil, core, n))
		if err != nil {
			return nil, fmt.Errorf("mode %d: %w", n, err)
		}
		r := rank(n, s)
		rows, _ := u.Dims()
		h.Factors[n] = mat.DenseCopyOf(u.Slice(0, rows, 0, r))
		h.Values[n] = s
		core = ModeProduct(core, n, h.Factors[n].T())
	}
	h.Core = core
	return h, nil
}

// rankWithin returns the smallest rank r ≥ 1 such that Σ_{i≥r} (s[i]/scale)² ≤ budget.
// Dividing by scale (the tensor's norm) keeps the squares from overflowing or
// underflowing for kernels of extreme magnitude.
func rankWithin(s []float64, scale, budget float64) int {
	tail := 0.0
	r := len(s)
	for r > 1 && tail+sq(s[r-1]/scale) <= budget {
		tail += sq(s[r-1] / scale)
		r--
	}
	return r
}

// RanksForTolerance returns the multilinear rank that a truncation of a tensor of norm
// norm with n-mode singular values values keeps for a relative error of at most tol: in
// each mode the smallest rank whose discarded squared singular values sum to at most
// tol²·norm²/3. By the bound of De Lathauwer et al. (2000), the truncated
// HOSVD at this rank is within tol; this is also the per-mode rule of the sequentially
// truncated HOSVD (Vannieuwenhoven et al. 2012). Every rank is at least 1.
func RanksForTolerance(values [3][]float64, norm, tol float64) [3]int {
	var r [3]int
	for n := range 3 {
		if norm == 0 {
			r[n] = 1
			continue
		}
		r[n] = rankWithin(values[n], norm, tol*tol/3)
	}
	return r
}

// NumericalRank returns the number of singular values in s (descending) above
// NumericalZero·s[0]; 0 if s is empty or all zero.
func NumericalRank(s []float64) int { return numericalRankAt(s, NumericalZero) }

// numericalRankAt counts the values of s (descending) above rel·s[0].
func numericalRankAt(s []float64, rel float64) int {
	if len(s) == 0 || s[0] == 0 {
		return 0
	}
	r := 0
	for _, v := range s {
		if v > rel*s[0] {
			r++
		}
	}
	return r
}

// TruncationBound returns the bound of De Lathauwer et al. (2000) on the
// error of the truncated HOSVD at multilinear rank r: the square root of the sum, over
// the three modes, of the squared n-mode singular values beyond r[n]. The true error
// ‖A − Â‖ never exceeds it.
func TruncationBound(values [3][]float64, r [3]int) float64 {
	// Scaled by the largest value so that the squares neither overflow nor underflow.
	scale := 0.0
	for n := range 3 {
		if len(values[n]) > 0 {
			scale = math.Max(scale, values[n][0])
		}
	}
	if scale == 0 {
		return 0
	}
	s := 0.0
	for n := range 3 {
		for i := r[n]; i < len(values[n]); i++ {
			s += sq(values[n][i] / scale)
		}
	}
	return scale * math.Sqrt(s)
}

// Distance returns the Frobenius norm ‖a − b‖. It panics if the dimensions differ.
func Distance(a, b *Dense) float64 {
	if a.Dims() != b.Dims() {
		panic("tensor: Distance between tensors of different dimensions")
	}
	d := &Dense{I: a.I, J: a.J, K: a.K, Data: make([]float64, len(a.Data))}
	for i, v := range a.Data {
		d.Data[i] = v - b.Data[i]
	}
	return d.Norm()
}

func sq(x float64) float64 { return x * x }
