package tensor

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"testing"
)

// scipyFixtures is tensor/testdata/scipy_kernels.json, made by
// scripts/make_kernel_fixtures.py with SciPy 1.10.1 / NumPy 1.24 (Debian 12).
type scipyFixtures struct {
	SciPy string `json:"scipy"`
	Cases []struct {
		Name   string         `json:"name"`
		Params map[string]any `json:"params"`
		Shape  [3]int         `json:"shape"`
		Data   []float64      `json:"data"`
	} `json:"cases"`
	Doc struct {
		Input  []float64 `json:"input"`
		Sigma1 []float64 `json:"sigma1"`
		Sigma4 []float64 `json:"sigma4"`
	} `json:"gaussian_filter1d_reflect"`
}

func loadSciPyFixtures(t *testing.T) *scipyFixtures {
	t.Helper()
	b, err := os.ReadFile("testdata/scipy_kernels.json")
	if err != nil {
		t.Fatal(err)
	}
	var f scipyFixtures
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	if len(f.Cases) == 0 {
		t.Fatal("no cases in testdata/scipy_kernels.json")
	}
	return &f
}

func fxNum(p map[string]any, k string) float64 { return p[k].(float64) }

func fxVec3(p map[string]any, k string) [3]float64 {
	l := p[k].([]any)
	return [3]float64{l[0].(float64), l[1].(float64), l[2].(float64)}
}

func fxIvec3(p map[string]any, k string) [3]int {
	v := fxVec3(p, k)
	return [3]int{int(v[0]), int(v[1]), int(v[2])}
}

// kernelMaxDiff returns max |a−b| and max |b|.
func kernelMaxDiff(a, b []float64) (diff, scale float64) {
	for i := range a {
		diff = max(diff, math.Abs(a[i]-b[i]))
		scale = max(scale, math.Abs(b[i]))
	}
	return diff, scale
}

// TestKernelsMatchSciPy compares every built-in kernel with the impulse response of the
// corresponding scipy.ndimage filter (mode='constant'), which for a convolution is the
// kernel itself.
// expected: scipy.ndimage gaussian_filter1d, gaussian_filter, sobel, laplace,
// gaussian_laplace, uniform_filter, SciPy 1.10.1 (Debian 12), via
// scripts/make_kernel_fixtures.py.
func TestKernelsMatchSciPy(t *testing.T) {
	f := loadSciPyFixtures(t)
	for i, c := range f.Cases {
		t.Run(fmt.Sprintf("%s/%d", c.Name, i), func(t *testing.T) {
			var got *Dense
			var plan *Plan
			p := c.Params
			switch c.Name {
			case "gaussian_filter1d":
				taps := Gaussian1D(fxNum(p, "sigma"), int(fxNum(p, "order")), fxNum(p, "truncate"))
				got = Outer(1, taps, []float64{1}, []float64{1})
			case "gaussian_filter":
				plan = GaussianPlan(fxVec3(p, "sigma"), fxIvec3(p, "order"))
			case "sobel":
				plan = SobelPlan(int(fxNum(p, "axis")))
			case "laplace":
				plan = Laplace7Plan()
				if d, _ := kernelMaxDiff(Laplace7().Data, plan.Kernel.Data); d != 0 {
					t.Errorf("Laplace7 and Laplace7Plan().Kernel differ by %g", d)
				}
			case "gaussian_laplace":
				plan = LoGPlan(fxVec3(p, "sigma"))
			case "uniform_filter":
				plan = BoxPlan(fxIvec3(p, "size"))
			case "difference_of_gaussians":
				plan = DoGPlan(fxVec3(p, "sigma1"), fxVec3(p, "sigma2"))
			default:
				t.Fatalf("unknown fixture %q", c.Name)
			}
			if plan != nil {
				got = plan.Kernel
				checkBuiltPlan(t, plan)
			}
			if got.Dims() != c.Shape {
				t.Fatalf("shape %v, SciPy %v", got.Dims(), c.Shape)
			}
			d, scale := kernelMaxDiff(got.Data, c.Data)
			// SciPy filters axis by axis in double precision; the sums differ from ours
			// only by rounding.
			if d > 1e-14*max(scale, 1) {
				t.Errorf("%v: max |ours − SciPy| = %g (largest tap %g)", p, d, scale)
			}
		})
	}
}

// checkBuiltPlan checks that a plan built in code stands for its Kernel exactly.
func checkBuiltPlan(t *testing.T, p *Plan) {
	t.Helper()
	if p.RelError != 0 {
		t.Errorf("RelError %g, want 0", p.RelError)
	}
	d := p.Kernel.Dims()
	for _, b := range p.Branches {
		first, second := d[0], d[1]
		if p.Order == YXZ {
			first, second = second, first
		}
		if len(b.First) != first {
			t.Errorf("first-pass taps %d, kernel %d", len(b.First), first)
		}
		for _, l := range b.Leaves {
			if len(l.Second) != second || len(l.Z) != d[2] {
				t.Errorf("leaf taps %d, %d; kernel %v", len(l.Second), len(l.Z), d)
			}
		}
	}
	diff, scale := kernelMaxDiff(p.Reconstruct().Data, p.Kernel.Data)
	if diff > 1e-15*max(scale, 1) {
		t.Errorf("plan terms differ from its Kernel by %g", diff)
	}
}

// reflectConvolve1D convolves f with taps (centre Center(len)) using the half-sample
// symmetric extension (d c b a | a b c d), SciPy ndimage's default mode 'reflect'.
func reflectConvolve1D(f, taps []float64) []float64 {
	n, c := len(f), Center(len(taps))
	at := func(i int) float64 {
		period := 2 * n
		i %= period
		if i < 0 {
			i += period
		}
		if i >= n {
			i = period - 1 - i
		}
		return f[i]
	}
	out := make([]float64, n)
	for p := range out {
		s := 0.0
		for t, w := range taps {
			s += w * at(p-(t-c))
		}
		out[p] = s
	}
	return out
}

// TestGaussian1DDocValues checks the documented example of gaussian_filter1d.
func TestGaussian1DDocValues(t *testing.T) {
	in := []float64{1, 2, 3, 4, 5}
	for _, tc := range []struct {
		sigma float64
		want  []float64
	}{
		// expected: scipy.ndimage.gaussian_filter1d documentation example, SciPy 1.10.1
		// (values as printed there, 8 decimals; also in REFERENCES.md).
		{1, []float64{1.42704095, 2.06782203, 3, 3.93217797, 4.57295905}},
		{4, []float64{2.91948343, 2.95023502, 3, 3.04976498, 3.08051657}},
	} {
		got := reflectConvolve1D(in, Gaussian1D(tc.sigma, 0, DefaultTruncate))
		for i := range got {
			if math.Abs(got[i]-tc.want[i]) > 5e-9 {
				t.Errorf("σ=%g: got %.9f, want %.8f at %d", tc.sigma, got[i], tc.want[i], i)
			}
		}
	}
	// And to full precision against the values SciPy printed into the fixture.
	f := loadSciPyFixtures(t)
	for _, tc := range []struct {
		sigma float64
		want  []float64
	}{{1, f.Doc.Sigma1}, {4, f.Doc.Sigma4}} {
		got := reflectConvolve1D(f.Doc.Input, Gaussian1D(tc.sigma, 0, DefaultTruncate))
		if d, _ := kernelMaxDiff(got, tc.want); d > 1e-14 {
			t.Errorf("σ=%g: differs from scipy.ndimage.gaussian_filter1d by %g", tc.sigma, d)
		}
	}
}

// TestGaussianDerivativeOrientation checks the sign convention on ramps: convolving
// x, x²/2 and x³/6 with the order-1, 2 and 3 kernels gives 1 (common practice: the n-th
// derivative of a Gaussian-smoothed x^n/n! is 1; evaluated at 0, where no large powers
// cancel).
func TestGaussianDerivativeOrientation(t *testing.T) {
	const sigma = 2.0
	for order := 1; order <= 3; order++ {
		taps := Gaussian1D(sigma, order, 10) // wide, so truncation costs < 1e-15
		c := Center(len(taps))
		p := 0.0
		s := 0.0
		for i, w := range taps {
			x := p - float64(i-c)
			s += w * math.Pow(x, float64(order)) / math.Gamma(float64(order+1))
		}
		if math.Abs(s-1) > 1e-6 {
			t.Errorf("order %d on x^%d/%d!: %g, want 1", order, order, order, s)
		}
	}
}

// TestSobelRamp: a ramp of slope 1 along the axis gives 2·4·4 = 32, the unnormalised
// scale of scipy.ndimage.sobel in 3D (REFERENCES.md, common practice).
func TestSobelRamp(t *testing.T) {
	for axis := range 3 {
		k := SobelPlan(axis).Kernel
		s := 0.0
		for z := range 3 {
			for y := range 3 {
				for x := range 3 {
					off := [3]int{x - 1, y - 1, z - 1}
					// f(p − off) with f = coordinate along axis, at p = 0.
					s += k.At(x, y, z) * float64(-off[axis])
				}
			}
		}
		if s != 32 {
			t.Errorf("axis %d: ramp gives %g, want 32", axis, s)
		}
	}
}

// TestBall checks the digital ball's stated facts (REFERENCES.md: radius 5 → 11³ with
// 515 non-zero taps, checked numerically with NumPy there).
func TestBall(t *testing.T) {
	for _, tc := range []struct {
		r       float64
		n, taps int
	}{
		{5, 11, 515},
		{0, 1, 1},
		{1, 3, 7},    // centre and six faces (common practice)
		{1.5, 3, 19}, // plus the twelve edges
		{1.75, 3, 27},
	} {
		b := Ball(tc.r)
		if b.Dims() != [3]int{tc.n, tc.n, tc.n} {
			t.Errorf("Ball(%g): dims %v", tc.r, b.Dims())
		}
		if got := b.NonZero(); got != tc.taps {
			t.Errorf("Ball(%g): %d non-zero taps, want %d", tc.r, got, tc.taps)
		}
		if s := tapSum(b.Data); math.Abs(s-1) > 1e-12 {
			t.Errorf("Ball(%g): sum %g", tc.r, s)
		}
	}
}

func tapSum(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s
}

// TestOrientedGaussianAxisAligned: with zero angles the oriented Gaussian is the outer
// product of three sampled Gaussians (the product of normalised 1D kernels is the
// normalised 3D kernel).
func TestOrientedGaussianAxisAligned(t *testing.T) {
	sigma := [3]float64{1, 1.5, 2.5}
	got := OrientedGaussian(sigma, [3]float64{}, DefaultTruncate)
	want := GaussianPlan(sigma, [3]int{}).Kernel
	if got.Dims() != want.Dims() {
		t.Fatalf("dims %v, want %v", got.Dims(), want.Dims())
	}
	if d, _ := kernelMaxDiff(got.Data, want.Data); d > 1e-15 {
		t.Errorf("differs from GaussianPlan by %g", d)
	}
}

// TestOrientedGaussianMoments checks the rotation convention through the second
// moments: Σ_p p·pᵀ·K(p) = R·diag(σ²)·Rᵀ. For σ ≥ 1 the sampled Gaussian's moments
// equal the continuous ones to about exp(−2π²σ²) (Poisson summation, common practice);
// truncation at 7σ leaves out less than 1e-11 of the mass.
func TestOrientedGaussianMoments(t *testing.T) {
	sigma := [3]float64{1.2, 1.0, 2.0}
	for _, ang := range [][3]float64{
		{0, math.Pi / 6, 0},
		{math.Pi / 5, 0, 0},
		{0, 0, math.Pi / 2},
		{0.3, -0.7, 1.1},
	} {
		k := OrientedGaussian(sigma, ang, 7)
		R := Rotation(ang)
		var want, got [3][3]float64
		for i := range 3 {
			for j := range 3 {
				for a := range 3 {
					want[i][j] += R[i][a] * sigma[a] * sigma[a] * R[j][a]
				}
			}
		}
		c := [3]int{Center(k.I), Center(k.J), Center(k.K)}
		for z := range k.K {
			for y := range k.J {
				for x := range k.I {
					p := [3]float64{float64(x - c[0]), float64(y - c[1]), float64(z - c[2])}
					v := k.At(x, y, z)
					for i := range 3 {
						for j := range 3 {
							got[i][j] += p[i] * p[j] * v
						}
					}
				}
			}
		}
		for i := range 3 {
			for j := range 3 {
				if math.Abs(got[i][j]-want[i][j]) > 1e-6 {
					t.Errorf("angles %v: moment (%d,%d) = %.9f, want %.9f", ang, i, j, got[i][j], want[i][j])
				}
			}
		}
	}
	// A quarter turn about z swaps the x and y widths.
	a := OrientedGaussian([3]float64{1, 2, 1.5}, [3]float64{0, 0, math.Pi / 2}, DefaultTruncate)
	b := OrientedGaussian([3]float64{2, 1, 1.5}, [3]float64{}, DefaultTruncate)
	if a.Dims() != b.Dims() {
		t.Fatalf("quarter turn: dims %v, want %v", a.Dims(), b.Dims())
	}
	if d, _ := kernelMaxDiff(a.Data, b.Data); d > 1e-12 {
		t.Errorf("quarter turn about z differs from swapped sigmas by %g", d)
	}
}

// TestLoGAndDoGStructure checks the term counts the literature states (REFERENCES.md:
// the Laplacian of Gaussian is 3 separable terms, a difference of Gaussians 2) and the
// zero-sum property of both (common practice: they remove a constant).
func TestLoGAndDoGStructure(t *testing.T) {
	log := LoGPlan([3]float64{1.5, 1, 2})
	if log.Terms() != 3 {
		t.Errorf("LoG terms %d, want 3", log.Terms())
	}
	log2 := LoGPlan([3]float64{1.5, 1, 0})
	if log2.Terms() != 2 || log2.Kernel.K != 1 {
		t.Errorf("2D LoG: terms %d, kz %d; want 2, 1", log2.Terms(), log2.Kernel.K)
	}
	dog := DoGPlan([3]float64{1, 1, 1}, [3]float64{1.6, 1.6, 0.5})
	if dog.Terms() != 2 {
		t.Errorf("DoG terms %d, want 2", dog.Terms())
	}
	checkBuiltPlan(t, dog)
	if s := tapSum(dog.Kernel.Data); math.Abs(s) > 1e-14 {
		t.Errorf("DoG sums to %g, want 0", s)
	}
	if s := tapSum(Laplace7().Data); s != 0 {
		t.Errorf("Laplace7 sums to %g, want 0", s)
	}
}

// TestGaussianZeroSigma: σ = 0 leaves an axis unfiltered.
func TestGaussianZeroSigma(t *testing.T) {
	p := GaussianPlan([3]float64{1, 0, 0}, [3]int{1, 0, 0})
	if p.Kernel.Dims() != [3]int{9, 1, 1} {
		t.Errorf("dims %v, want [9 1 1]", p.Kernel.Dims())
	}
	// The unit taps along y and z are the identity and cost nothing (Plan.Macs).
	if p.Macs() != 9 {
		t.Errorf("macs %d, want 9", p.Macs())
	}
}

func TestKernelPanics(t *testing.T) {
	for name, f := range map[string]func(){
		"negative sigma":          func() { Gaussian1D(-1, 0, 4) },
		"NaN sigma":               func() { Gaussian1D(math.NaN(), 0, 4) },
		"negative order":          func() { Gaussian1D(1, -1, 4) },
		"derivative at σ=0":       func() { Gaussian1D(0, 1, 4) },
		"even box":                func() { BoxPlan([3]int{3, 4, 3}) },
		"zero box":                func() { BoxPlan([3]int{3, 0, 3}) },
		"Sobel axis 3":            func() { SobelPlan(3) },
		"LoG all zero":            func() { LoGPlan([3]float64{}) },
		"negative ball":           func() { Ball(-1) },
		"oriented zero sigma":     func() { OrientedGaussian([3]float64{1, 0, 1}, [3]float64{}, 4) },
		"oriented bad truncate":   func() { OrientedGaussian([3]float64{1, 1, 1}, [3]float64{}, math.Inf(1)) },
		"negative truncate in 1D": func() { Gaussian1D(1, 0, -2) },
		"indefinite covariance":   func() { CovarianceGaussian([3][3]float64{{1, 2, 0}, {2, 1, 0}, {0, 0, 1}}, 4) },
		"asymmetric covariance":   func() { CovarianceGaussian([3][3]float64{{1, 0.5, 0}, {0, 1, 0}, {0, 0, 1}}, 4) },
		"NaN covariance":          func() { CovarianceGaussian([3][3]float64{{1, 0, 0}, {0, math.NaN(), 0}, {0, 0, 1}}, 4) },
	} {
		t.Run(name, func(t *testing.T) {
			defer func() {
				if recover() == nil {
					t.Errorf("no panic")
				}
			}()
			f()
		})
	}
}

// TestInvertSPD3: the adjugate inverse of random symmetric positive definite matrices
// A = BᵀB + I satisfies A·A⁻¹ = I (a property test, common practice).
func TestInvertSPD3(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	for range 200 {
		var b, a [3][3]float64
		for i := range 3 {
			for j := range 3 {
				b[i][j] = rng.NormFloat64() * 3
			}
		}
		for i := range 3 {
			for j := range 3 {
				for k := range 3 {
					a[i][j] += b[k][i] * b[k][j]
				}
			}
			a[i][i]++
		}
		inv, ok := invertSPD3(a)
		if !ok {
			t.Fatalf("%v reported not positive definite", a)
		}
		p := rotMul(a, inv)
		for i := range 3 {
			for j := range 3 {
				want := 0.0
				if i == j {
					want = 1
				}
				if math.Abs(p[i][j]-want) > 1e-9 {
					t.Fatalf("A·A⁻¹ = %v", p)
				}
			}
		}
	}
}

func ExampleGaussianPlan() {
	p := GaussianPlan([3]float64{1, 1, 0.5}, [3]int{})
	fmt.Println(p.Shape(), p.Form, p.Terms(), p.Macs(), p.Kernel.NonZero())
	// Output: [9 9 5] cp 1 23 405
}

func ExampleBall() {
	b := Ball(5)
	fmt.Println(b.Dims(), b.NonZero())
	// Output: [11 11 11] 515
}
