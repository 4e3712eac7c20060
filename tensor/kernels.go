package tensor

import (
	"fmt"
	"math"
)

// Built-in kernels. All sizes and widths are in voxels: a caller with physical units
// (millimetres, micrometres) divides by the voxel spacing first. Every kernel is given
// in kernel order, the way a convolution uses it: the filtered value at voxel p is
// Σ_t K[t]·f[p − (t − c)] with c the centre of Center. The impulse response of a
// convolution is therefore the kernel itself, which is how the tests compare these
// kernels with SciPy's ndimage filters.

// DefaultTruncate is the half-width of a sampled Gaussian in standard deviations:
// radius = int(truncate·σ + 0.5) voxels. 4 is common practice (it is SciPy ndimage's
// default), and leaves out about 6e-5 of the mass of a 1D Gaussian.
const DefaultTruncate = 4.0

// GaussianRadius returns the half-width in voxels of a sampled Gaussian of standard
// deviation sigma voxels truncated at truncate standard deviations: int(truncate·σ + 0.5),
// so the kernel has 2·radius + 1 taps (common practice, as SciPy's ndimage does it).
func GaussianRadius(sigma, truncate float64) int {
	return int(truncate*sigma + 0.5)
}

// Gaussian1D returns the sampled Gaussian of standard deviation sigma voxels, or its
// derivative of the given order, with 2r+1 taps where r = GaussianRadius(sigma, truncate).
//
// The order-0 kernel is exp(−x²/2σ²) at x = −r..r, normalised to sum 1. A derivative of
// order n is q(x)·φ(x), where φ is that normalised kernel and q the polynomial obtained
// by differentiating the Gaussian n times (q ← q′ − x·q/σ², starting from q = 1). This
// is the construction of SciPy's ndimage (scipy/ndimage/_filters.py, _gaussian_kernel1d),
// so that convolving with these taps equals scipy.ndimage.gaussian_filter1d(f, sigma,
// order=n). The taps are in convolution orientation: for order 1 the first tap is
// positive and the last negative, so that a ramp rising along the axis gives a positive
// derivative.
//
// sigma = 0 with order 0 gives the single tap [1] (no filtering). Gaussian1D panics if
// sigma is negative or not finite, if order is negative, if sigma is 0 with order > 0,
// or if truncate is negative or not finite.
func Gaussian1D(sigma float64, order int, truncate float64) []float64 {
	if sigma < 0 || math.IsNaN(sigma) || math.IsInf(sigma, 0) {
		panic(fmt.Sprintf("tensor: Gaussian sigma %v is not a finite non-negative number", sigma))
	}
	if order < 0 {
		panic(fmt.Sprintf("tensor: negative Gaussian derivative order %d", order))
	}
	if truncate < 0 || math.IsNaN(truncate) || math.IsInf(truncate, 0) {
		panic(fmt.Sprintf("tensor: Gaussian truncate %v is not a finite non-negative number", truncate))
	}
	if sigma == 0 {
		if order > 0 {
			panic("tensor: a Gaussian derivative needs sigma > 0")
		}
		return []float64{1}
	}
	r := GaussianRadius(sigma, truncate)
	s2 := sigma * sigma
	phi := make([]float64, 2*r+1)
	sum := 0.0
	for i := range phi {
		x := float64(i - r)
		phi[i] = math.Exp(-0.5 / s2 * x * x)
		sum += phi[i]
	}
	for i := range phi {
		phi[i] /= sum
	}
	if order == 0 {
		return phi
	}
	// q holds the coefficients of the polynomial q(x) = Σ q[e]·x^e. Differentiating
	// q(x)·exp(−x²/2σ²) gives (q′(x) − x·q(x)/σ²)·exp(−x²/2σ²).
	q := make([]float64, order+1)
	next := make([]float64, order+1)
	q[0] = 1
	for range order {
		for e := range next {
			v := 0.0
			if e+1 <= order {
				v += float64(e+1) * q[e+1]
			}
			if e >= 1 {
				v -= q[e-1] / s2
			}
			next[e] = v
		}
		q, next = next, q
	}
	for i := range phi {
		x := float64(i - r)
		// Sum the powers in increasing order, as SciPy's matrix product does.
		p, xe := 0.0, 1.0
		for e := range q {
			p += q[e] * xe
			xe *= x
		}
		phi[i] *= p
	}
	return phi
}

// GaussianPlan returns the exact rank-one plan of a sampled 3D Gaussian with standard
// deviations sigma = (σx, σy, σz) voxels and derivative orders order = (nx, ny, nz),
// truncated at DefaultTruncate standard deviations. σ = 0 on an axis means no filtering
// along it (a single unit tap); the order on that axis must then be 0. Convolving with
// it equals scipy.ndimage.gaussian_filter(f, sigma, order) (with SciPy's axes reversed:
// SciPy lists (z, y, x)).
func GaussianPlan(sigma [3]float64, order [3]int) *Plan {
	return GaussianPlanTruncated(sigma, order, DefaultTruncate)
}

// GaussianPlanTruncated is GaussianPlan with the half-width truncate (in standard
// deviations) given explicitly.
func GaussianPlanTruncated(sigma [3]float64, order [3]int, truncate float64) *Plan {
	x := Gaussian1D(sigma[0], order[0], truncate)
	y := Gaussian1D(sigma[1], order[1], truncate)
	z := Gaussian1D(sigma[2], order[2], truncate)
	return SeparablePlan(1, x, y, z)
}

// BoxPlan returns the exact rank-one plan of the mean over a box of size (sx, sy, sz)
// voxels: every tap is 1/(sx·sy·sz). Convolving with it equals
// scipy.ndimage.uniform_filter(f, size). Sizes must be odd, so that the box is centred;
// BoxPlan panics otherwise.
func BoxPlan(size [3]int) *Plan {
	var taps [3][]float64
	for a, n := range size {
		if n <= 0 || n%2 == 0 {
			panic(fmt.Sprintf("tensor: box size %d along axis %d is not a positive odd number", n, a))
		}
		taps[a] = make([]float64, n)
		for i := range taps[a] {
			taps[a][i] = 1 / float64(n)
		}
	}
	return SeparablePlan(1, taps[0], taps[1], taps[2])
}

// SobelPlan returns the exact rank-one plan of the 3D Sobel-type derivative along axis
// (0 = x, 1 = y, 2 = z): the central difference [1, 0, −1] along the axis (in
// convolution orientation, so the output at p is f[p+1] − f[p−1] and a ramp rising
// along the axis gives a positive value) and the smoothing [1, 2, 1] across each of the
// other two axes. Like scipy.ndimage.sobel, which it equals, it is unnormalised: a ramp
// of slope 1 voxel⁻¹ gives 2·4·4 = 32; divide by 32 for a unit-slope derivative.
// It is the 3D extension of the 3×3 gradient operator of I. Sobel and G. Feldman
// ("A 3×3 isotropic gradient operator for image processing", Stanford Artificial
// Intelligence Project, 1968; cited from memory, first published in R. O. Duda,
// P. E. Hart, Pattern Classification and Scene Analysis, Wiley, 1973).
// SobelPlan panics if axis is not 0, 1 or 2.
func SobelPlan(axis int) *Plan {
	if axis < 0 || axis > 2 {
		panic(fmt.Sprintf("tensor: Sobel axis %d is not 0, 1 or 2", axis))
	}
	var taps [3][]float64
	for a := range taps {
		if a == axis {
			taps[a] = []float64{1, 0, -1}
		} else {
			taps[a] = []float64{1, 2, 1}
		}
	}
	return SeparablePlan(1, taps[0], taps[1], taps[2])
}

// laplaceTerms are the 1D factors of the 7-point Laplacian stencil: the second
// difference d = [1, −2, 1] and the unit impulse e = [0, 1, 0].
var (
	laplaceD = []float64{1, -2, 1}
	laplaceE = []float64{0, 1, 0}
)

// Laplace7 returns the 3×3×3 7-point Laplacian stencil: −6 at the centre and 1 at each
// of its six face neighbours, the discrete Laplacian of scipy.ndimage.laplace (common
// practice). Its multilinear rank is (2, 2, 2) and its CP rank 3 (de Silva & Lim, SIAM
// J. Matrix Anal. Appl. 30(3), 2008).
func Laplace7() *Dense {
	return Laplace7Plan().Kernel
}

// Laplace7Plan returns the 7-point Laplacian stencil as the exact sum of three separable
// terms d∘e∘e + e∘d∘e + e∘e∘d, d = [1, −2, 1], e = [0, 1, 0]. It costs 27 multiply-adds
// per voxel against 7 for the stencil applied directly, so a planner will prefer the
// direct form; the plan exists as the exact CP reference of the stencil.
func Laplace7Plan() *Plan {
	return sumOfSecondDerivatives(laplaceD, laplaceE, laplaceD, laplaceE, laplaceD, laplaceE)
}

// sumOfSecondDerivatives returns the CP plan dx∘sy∘sz + sx∘dy∘sz + sx∘sy∘dz, where d
// are second-derivative taps and s smoothing taps along each axis. A nil dA leaves out
// the term for that axis.
func sumOfSecondDerivatives(dx, sx, dy, sy, dz, sz []float64) *Plan {
	kernel := New(len(sx), len(sy), len(sz))
	var branches []Branch
	add := func(x, y, z []float64) {
		kernel.AddScaled(1, Outer(1, x, y, z))
		branches = append(branches, Branch{
			First:  append([]float64(nil), x...),
			Leaves: []Leaf{{Second: append([]float64(nil), y...), Z: append([]float64(nil), z...)}},
		})
	}
	if dx != nil {
		add(dx, sy, sz)
	}
	if dy != nil {
		add(sx, dy, sz)
	}
	if dz != nil {
		add(sx, sy, dz)
	}
	return &Plan{Form: CP, Order: XYZ, Kernel: kernel, Branches: branches}
}

// LoGPlan returns the Laplacian of Gaussian (D. Marr, E. Hildreth, "Theory of edge
// detection", Proc. R. Soc. Lond. B 207:187–217, 1980) with standard deviations sigma
// voxels, truncated at DefaultTruncate, as the exact sum of three separable terms:
// g″x∘gy∘gz + gx∘g″y∘gz + gx∘gy∘g″z. Convolving with it equals
// scipy.ndimage.gaussian_laplace(f, sigma). An axis with σ = 0 is neither smoothed nor
// differentiated (a 2D Laplacian of Gaussian applied slice by slice, say), and its
// term is left out. (SciPy instead adds a plain Gaussian smoothing for that axis.)
func LoGPlan(sigma [3]float64) *Plan {
	return LoGPlanTruncated(sigma, DefaultTruncate)
}

// LoGPlanTruncated is LoGPlan with the Gaussian half-width truncate (in standard
// deviations) given explicitly. It panics if every sigma is 0.
func LoGPlanTruncated(sigma [3]float64, truncate float64) *Plan {
	var d, s [3][]float64
	some := false
	for a := range sigma {
		s[a] = Gaussian1D(sigma[a], 0, truncate)
		if sigma[a] > 0 {
			d[a] = Gaussian1D(sigma[a], 2, truncate)
			some = true
		}
	}
	if !some {
		panic("tensor: Laplacian of Gaussian with every sigma 0")
	}
	return sumOfSecondDerivatives(d[0], s[0], d[1], s[1], d[2], s[2])
}

// DoGPlan returns the difference of Gaussians G(s1) − G(s2) (Marr & Hildreth 1980, as
// an approximation of the Laplacian of Gaussian when s2 ≈ 1.6·s1), each Gaussian
// truncated at DefaultTruncate and normalised to sum 1, as an exact plan of two
// separable terms. All tap vectors along an axis share the kernel's length and centre,
// so the narrower Gaussian's taps are padded with zeros to the wider one's length.
func DoGPlan(s1, s2 [3]float64) *Plan {
	return DoGPlanTruncated(s1, s2, DefaultTruncate)
}

// DoGPlanTruncated is DoGPlan with the Gaussian half-width truncate (in standard
// deviations) given explicitly.
func DoGPlanTruncated(s1, s2 [3]float64, truncate float64) *Plan {
	var g1, g2 [3][]float64
	for a := range 3 {
		g1[a] = Gaussian1D(s1[a], 0, truncate)
		g2[a] = Gaussian1D(s2[a], 0, truncate)
		n := max(len(g1[a]), len(g2[a]))
		g1[a] = padCentred(g1[a], n)
		g2[a] = padCentred(g2[a], n)
	}
	kernel := Outer(1, g1[0], g1[1], g1[2])
	kernel.AddScaled(-1, Outer(1, g2[0], g2[1], g2[2]))
	neg := make([]float64, len(g2[2]))
	for i, v := range g2[2] {
		neg[i] = -v
	}
	return &Plan{
		Form:   CP,
		Order:  XYZ,
		Kernel: kernel,
		Branches: []Branch{
			{First: g1[0], Leaves: []Leaf{{Second: g1[1], Z: g1[2]}}},
			{First: g2[0], Leaves: []Leaf{{Second: g2[1], Z: neg}}},
		},
	}
}

// padCentred returns taps (of odd length) padded with zeros on both sides to odd
// length n, keeping the centre tap in the centre.
func padCentred(taps []float64, n int) []float64 {
	out := make([]float64, n)
	copy(out[(n-len(taps))/2:], taps)
	return out
}

// Ball returns the digital ball of the given radius in voxels: a (2⌊r⌋+1)³ kernel whose
// taps at offsets (i, j, k) with i² + j² + k² ≤ r² hold 1/count and the others 0, so
// that it averages over the ball (common practice). Ball(5) is 11³ with 515 non-zero
// taps. It panics if radius is negative or not finite.
func Ball(radius float64) *Dense {
	if radius < 0 || math.IsNaN(radius) || math.IsInf(radius, 0) {
		panic(fmt.Sprintf("tensor: ball radius %v is not a finite non-negative number", radius))
	}
	r := int(math.Floor(radius))
	n := 2*r + 1
	t := New(n, n, n)
	r2 := radius * radius
	count := 0
	for k := -r; k <= r; k++ {
		for j := -r; j <= r; j++ {
			for i := -r; i <= r; i++ {
				if float64(i*i+j*j+k*k) <= r2 {
					t.Set(i+r, j+r, k+r, 1)
					count++
				}
			}
		}
	}
	for n, v := range t.Data {
		t.Data[n] = v / float64(count)
	}
	return t
}

// Rotation returns the 3×3 rotation matrix R = Rz(c)·Ry(b)·Rx(a) for angles = (a, b, c)
// in radians: a right-handed rotation by a about the x axis first, then by b about the
// (fixed) y axis, then by c about the (fixed) z axis; a positive angle turns
// counter-clockwise when seen from the positive end of its axis looking back at the
// origin. R[i][j] is the element in row i and column j; R maps a vector v (in x, y, z
// components) to R·v, so column a of R is the image of axis a.
func Rotation(angles [3]float64) [3][3]float64 {
	sa, ca := math.Sincos(angles[0])
	sb, cb := math.Sincos(angles[1])
	sc, cc := math.Sincos(angles[2])
	rx := [3][3]float64{{1, 0, 0}, {0, ca, -sa}, {0, sa, ca}}
	ry := [3][3]float64{{cb, 0, sb}, {0, 1, 0}, {-sb, 0, cb}}
	rz := [3][3]float64{{cc, -sc, 0}, {sc, cc, 0}, {0, 0, 1}}
	return rotMul(rz, rotMul(ry, rx))
}

func rotMul(a, b [3][3]float64) [3][3]float64 {
	var c [3][3]float64
	for i := range 3 {
		for j := range 3 {
			for k := range 3 {
				c[i][j] += a[i][k] * b[k][j]
			}
		}
	}
	return c
}

// OrientedGaussian returns a sampled anisotropic Gaussian whose principal axes are the
// x, y and z axes turned by Rotation(angles), with standard deviations sigma (in
// voxels) along the turned axes, normalised to sum 1: a model of a tilted
// point-spread function, as in a light-sheet or oblique-plane microscope. It is
// CovarianceGaussian with covariance Σ = R·diag(σ²)·Rᵀ, so with zero angles it equals
// the outer product of three Gaussian1D kernels. OrientedGaussian panics if a sigma is
// not positive and finite, or if truncate is negative or not finite.
func OrientedGaussian(sigma [3]float64, angles [3]float64, truncate float64) *Dense {
	for _, s := range sigma {
		if !(s > 0) || math.IsInf(s, 0) {
			panic(fmt.Sprintf("tensor: oriented Gaussian sigma %v is not positive and finite", s))
		}
	}
	return CovarianceGaussian(OrientedCovariance(sigma, angles), truncate)
}

// OrientedCovariance returns R·diag(σ²)·Rᵀ with R = Rotation(angles): the covariance of
// a Gaussian with standard deviations sigma along the axes turned by R.
func OrientedCovariance(sigma, angles [3]float64) [3][3]float64 {
	R := Rotation(angles)
	var c [3][3]float64
	for i := range 3 {
		for j := range 3 {
			for a := range 3 {
				c[i][j] += R[i][a] * sigma[a] * sigma[a] * R[j][a]
			}
		}
	}
	return c
}

// CovarianceSize returns the dimensions (kx, ky, kz) of CovarianceGaussian(cov,
// truncate) without building it, so that a caller can refuse a kernel too large to
// hold: 2·int(truncate·√Σᵢᵢ + 0.5) + 1 along axis i, the extent of the ellipsoid at
// truncate standard deviations, rounded as GaussianRadius rounds it.
func CovarianceSize(cov [3][3]float64, truncate float64) [3]int {
	var n [3]int
	for i := range 3 {
		n[i] = 2*int(truncate*math.Sqrt(cov[i][i])+0.5) + 1
	}
	return n
}

// OrientedGaussianSize returns the dimensions of OrientedGaussian(sigma, angles,
// truncate) without building it.
func OrientedGaussianSize(sigma, angles [3]float64, truncate float64) [3]int {
	return CovarianceSize(OrientedCovariance(sigma, angles), truncate)
}

// CovarianceGaussian returns the sampled Gaussian with covariance cov (in voxels²),
// normalised to sum 1: a tap at offset p holds exp(−½·pᵀΣ⁻¹p) before normalisation, and
// the kernel has the dimensions of CovarianceSize. This is the general form behind
// OrientedGaussian; it also serves a Gaussian given in physical units on anisotropic
// voxels, where Σ_voxels = S⁻¹·Σ_physical·S⁻¹ with S the diagonal of voxel sizes.
// CovarianceGaussian panics if cov is not symmetric positive definite or truncate is
// negative or not finite.
func CovarianceGaussian(cov [3][3]float64, truncate float64) *Dense {
	if truncate < 0 || math.IsNaN(truncate) || math.IsInf(truncate, 0) {
		panic(fmt.Sprintf("tensor: Gaussian truncate %v is not a finite non-negative number", truncate))
	}
	inv, ok := invertSPD3(cov)
	if !ok {
		panic(fmt.Sprintf("tensor: covariance %v is not symmetric positive definite", cov))
	}
	size := CovarianceSize(cov, truncate)
	rad := [3]int{size[0] / 2, size[1] / 2, size[2] / 2}
	t := New(size[0], size[1], size[2])
	sum := 0.0
	n := 0
	for k := -rad[2]; k <= rad[2]; k++ {
		for j := -rad[1]; j <= rad[1]; j++ {
			for i := -rad[0]; i <= rad[0]; i++ {
				p := [3]float64{float64(i), float64(j), float64(k)}
				q := 0.0
				for a := range 3 {
					for b := range 3 {
						q += p[a] * inv[a][b] * p[b]
					}
				}
				v := math.Exp(-0.5 * q)
				t.Data[n] = v
				sum += v
				n++
			}
		}
	}
	for n := range t.Data {
		t.Data[n] /= sum
	}
	return t
}

// invertSPD3 inverts a symmetric positive definite 3×3 matrix by its adjugate, and
// reports false if m is not symmetric (to a relative 1e-12), not positive definite
// (Sylvester's criterion: all leading principal minors positive) or not finite.
func invertSPD3(m [3][3]float64) ([3][3]float64, bool) {
	var inv [3][3]float64
	scale := 0.0
	for i := range 3 {
		for j := range 3 {
			if math.IsNaN(m[i][j]) || math.IsInf(m[i][j], 0) {
				return inv, false
			}
			scale = max(scale, math.Abs(m[i][j]))
		}
	}
	for i := range 3 {
		for j := range i {
			if math.Abs(m[i][j]-m[j][i]) > 1e-12*scale {
				return inv, false
			}
		}
	}
	m1 := m[0][0]
	m2 := m[0][0]*m[1][1] - m[0][1]*m[1][0]
	c00 := m[1][1]*m[2][2] - m[1][2]*m[2][1]
	c01 := m[1][2]*m[2][0] - m[1][0]*m[2][2]
	c02 := m[1][0]*m[2][1] - m[1][1]*m[2][0]
	det := m[0][0]*c00 + m[0][1]*c01 + m[0][2]*c02
	if !(m1 > 0 && m2 > 0 && det > 0) {
		return inv, false
	}
	inv[0][0] = c00 / det
	inv[1][0] = c01 / det
	inv[2][0] = c02 / det
	inv[0][1] = (m[0][2]*m[2][1] - m[0][1]*m[2][2]) / det
	inv[1][1] = (m[0][0]*m[2][2] - m[0][2]*m[2][0]) / det
	inv[2][1] = (m[0][1]*m[2][0] - m[0][0]*m[2][1]) / det
	inv[0][2] = (m[0][1]*m[1][2] - m[0][2]*m[1][1]) / det
	inv[1][2] = (m[0][2]*m[1][0] - m[0][0]*m[1][2]) / det
	inv[2][2] = (m[0][0]*m[1][1] - m[0][1]*m[1][0]) / det
	return inv, true
}
