package tensor_test

import (
	"fmt"
	"math"

	"github.com/tripass/tripass/tensor"
)

// A binomial 3×3×3 smoothing kernel, built in 3D, is one outer product: three passes of
// 3 taps replace 27 multiply-adds per voxel.
func ExampleAnalyze() {
	b := []float64{1, 2, 1}
	k := tensor.New(3, 3, 3)
	for z := range 3 {
		for y := range 3 {
			for x := range 3 {
				k.Set(x, y, z, b[x]*b[y]*b[z]/64)
			}
		}
	}
	a, err := tensor.Analyze(k, tensor.AnalyzeOptions{})
	if err != nil {
		panic(err)
	}
	fmt.Println("separable:", a.Separable)
	fmt.Println("chosen:", a.Chosen.Form, a.Chosen.Terms, "term,", a.Chosen.Macs, "multiply-adds against", a.DirectMacs)
	// Output:
	// separable: true
	// chosen: cp 1 term, 9 multiply-adds against 27
}

// A Gaussian point-spread function elongated along z and tilted 30° about y is not
// separable, but a Tucker form with y passed first is far cheaper than direct.
func ExampleAnalyze_tilted() {
	const n, deg = 15, 30.0
	c, s := math.Cos(deg*math.Pi/180), math.Sin(deg*math.Pi/180)
	k := tensor.New(n, n, n)
	for z := range n {
		for y := range n {
			for x := range n {
				X, Y, Z := float64(x-n/2), float64(y-n/2), float64(z-n/2)
				u, w := c*X-s*Z, s*X+c*Z // coordinates along the PSF's own axes
				k.Set(x, y, z, math.Exp(-0.5*(u*u+Y*Y+w*w/9)))
			}
		}
	}
	a, err := tensor.Analyze(k, tensor.AnalyzeOptions{Tolerance: 1e-3})
	if err != nil {
		panic(err)
	}
	fmt.Println("multilinear rank at 1e-3:", a.MultilinearRank)
	ch := a.Chosen
	fmt.Printf("chosen: %v ranks %v order %v, %d multiply-adds against %d, error below 1e-3: %v\n",
		ch.Form, ch.Ranks, ch.Order, ch.Macs, a.DirectMacs, ch.RelError < 1e-3)
	// Output:
	// multilinear rank at 1e-3: [9 1 9]
	// chosen: tucker ranks [9 1 9] order yxz, 285 multiply-adds against 3375, error below 1e-3: true
}

// The 7-point Laplacian stencil is exactly three separable terms; two-term fits
// degenerate. Its 7 taps are cheaper applied directly.
func ExampleAnalyze_laplacian() {
	e, d := []float64{0, 1, 0}, []float64{1, -2, 1}
	l := tensor.Outer(1, d, e, e)
	l.AddScaled(1, tensor.Outer(1, e, d, e))
	l.AddScaled(1, tensor.Outer(1, e, e, d))
	a, err := tensor.Analyze(l, tensor.AnalyzeOptions{})
	if err != nil {
		panic(err)
	}
	for _, o := range a.Options {
		if o.Form == tensor.CP {
			fmt.Printf("cp %d terms: %d multiply-adds, exact %v, degenerate %v\n", o.Terms, o.Macs, o.RelError < 1e-12, o.Degenerate)
		}
	}
	fmt.Println("chosen:", a.Chosen.Form, a.Chosen.Macs)
	// Output:
	// cp 1 terms: 9 multiply-adds, exact false, degenerate false
	// cp 2 terms: 18 multiply-adds, exact false, degenerate true
	// cp 3 terms: 27 multiply-adds, exact true, degenerate false
	// chosen: direct 7
}

// A difference of two Gaussians is two separable terms; CP-ALS finds them exactly.
func ExampleCPALS() {
	gauss := func(sigma float64) []float64 {
		g := make([]float64, 13)
		sum := 0.0
		for i := range g {
			x := float64(i - 6)
			g[i] = math.Exp(-x * x / (2 * sigma * sigma))
			sum += g[i]
		}
		for i := range g {
			g[i] /= sum
		}
		return g
	}
	g1, g2 := gauss(1), gauss(1.6)
	dog := tensor.Outer(1, g1, g1, g1)
	dog.AddScaled(-1, tensor.Outer(1, g2, g2, g2))
	c, err := tensor.CPALS(dog, 2, tensor.CPOptions{})
	if err != nil {
		panic(err)
	}
	fmt.Printf("2 terms: exact %v, degenerate %v, weight signs %+.0f %+.0f\n",
		c.RelError < 1e-12, c.Degenerate, math.Copysign(1, c.Weights[0]), math.Copysign(1, c.Weights[1]))
	// Output:
	// 2 terms: exact true, degenerate false, weight signs +1 -1
}

// The sequentially truncated HOSVD keeps, mode by mode, just enough of the spectrum for
// the requested relative error.
func ExampleSTHOSVD() {
	// An anisotropic Gaussian tilted 30° about y: y separates, x and z do not.
	const n = 11
	c, s := math.Cos(math.Pi/6), math.Sin(math.Pi/6)
	k := tensor.New(n, n, n)
	for z := range n {
		for y := range n {
			for x := range n {
				X, Y, Z := float64(x-n/2), float64(y-n/2), float64(z-n/2)
				u, w := c*X-s*Z, s*X+c*Z
				k.Set(x, y, z, math.Exp(-0.5*(u*u+Y*Y+w*w/4)))
			}
		}
	}
	for _, tol := range []float64{1e-2, 1e-4, 1e-8} {
		st, err := tensor.STHOSVD(k, tol)
		if err != nil {
			panic(err)
		}
		e := tensor.Distance(k, st.Reconstruct()) / k.Norm()
		fmt.Printf("tolerance %.0e: ranks %v, within it %v\n", tol, st.Ranks(), e <= tol)
	}
	// Output:
	// tolerance 1e-02: ranks [5 1 5], within it true
	// tolerance 1e-04: ranks [8 1 8], within it true
	// tolerance 1e-08: ranks [11 1 11], within it true
}
