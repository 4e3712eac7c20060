package tensor

import "math"

// Kernels built in code for the tests, each from its defining formula.

// laplacianStencil is the 7-point Laplacian stencil d∘e∘e + e∘d∘e + e∘e∘d with
// e = [0,1,0] and d = [1,−2,1].
func laplacianStencil() *Dense {
	e, d := []float64{0, 1, 0}, []float64{1, -2, 1}
	l := Outer(1, d, e, e)
	l.AddScaled(1, Outer(1, e, d, e))
	l.AddScaled(1, Outer(1, e, e, d))
	return l
}

// sampledGauss returns exp(−x²/2σ²) at x = −r … r normalised to sum 1, and its second
// derivative g″ = g·(x² − σ²)/σ⁴ at the same points.
func sampledGauss(sigma float64, r int) (g, g2 []float64) {
	g, g2 = make([]float64, 2*r+1), make([]float64, 2*r+1)
	sum := 0.0
	for i := range g {
		x := float64(i - r)
		g[i] = math.Exp(-x * x / (2 * sigma * sigma))
		sum += g[i]
	}
	for i := range g {
		x := float64(i - r)
		g[i] /= sum
		g2[i] = g[i] * (x*x - sigma*sigma) / (sigma * sigma * sigma * sigma)
	}
	return g, g2
}

// gaussian3D samples exp(−½(x²/σx² + y²/σy² + z²/σz²)) on a (2rx+1)×(2ry+1)×(2rz+1)
// grid directly in 3D (not as a product of 1D kernels), normalised to sum 1.
func gaussian3D(sigma [3]float64, r [3]int) *Dense {
	k := New(2*r[0]+1, 2*r[1]+1, 2*r[2]+1)
	for z := range k.K {
		for y := range k.J {
			for x := range k.I {
				X, Y, Z := float64(x-r[0]), float64(y-r[1]), float64(z-r[2])
				v := math.Exp(-0.5 * (X*X/sq(sigma[0]) + Y*Y/sq(sigma[1]) + Z*Z/sq(sigma[2])))
				k.Set(x, y, z, v)
			}
		}
	}
	return normalizeSum(k)
}

// laplacianOfGaussian is g″∘g∘g + g∘g″∘g + g∘g∘g″ for an isotropic sampled Gaussian.
func laplacianOfGaussian(sigma float64, r int) *Dense {
	g, g2 := sampledGauss(sigma, r)
	k := Outer(1, g2, g, g)
	k.AddScaled(1, Outer(1, g, g2, g))
	k.AddScaled(1, Outer(1, g, g, g2))
	return k
}

// differenceOfGaussians is g₁∘g₁∘g₁ − g₂∘g₂∘g₂ for isotropic sampled Gaussians.
func differenceOfGaussians(s1, s2 float64, r int) *Dense {
	g1, _ := sampledGauss(s1, r)
	g2, _ := sampledGauss(s2, r)
	k := Outer(1, g1, g1, g1)
	k.AddScaled(-1, Outer(1, g2, g2, g2))
	return k
}

// sobel3D is the 3D Sobel-type derivative along x: [−1,0,1] along x, [1,2,1] along y
// and z.
func sobel3D() *Dense {
	return Outer(1, []float64{-1, 0, 1}, []float64{1, 2, 1}, []float64{1, 2, 1})
}

// digitalBall is 1 at the integer points of an n×n×n grid within radius r of the centre.
func digitalBall(n int, r float64) *Dense {
	k := New(n, n, n)
	c := n / 2
	for z := range n {
		for y := range n {
			for x := range n {
				if float64((x-c)*(x-c)+(y-c)*(y-c)+(z-c)*(z-c)) <= r*r {
					k.Set(x, y, z, 1)
				}
			}
		}
	}
	return k
}

// tiltedGaussian samples exp(−½ xᵀ R Σ⁻¹ Rᵀ x) on an n×n×n grid centred at n/2, with
// Σ = diag(σ²) and R the rotation by deg degrees about the y axis, normalised to sum 1:
// a model of a point-spread function tilted in the x–z plane.
func tiltedGaussian(n int, sigma [3]float64, deg float64) *Dense {
	th := deg * math.Pi / 180
	c, s := math.Cos(th), math.Sin(th)
	k := New(n, n, n)
	h := n / 2
	for z := range n {
		for y := range n {
			for x := range n {
				X, Y, Z := float64(x-h), float64(y-h), float64(z-h)
				// Rᵀx: the point in the Gaussian's own axes.
				u, w := c*X-s*Z, s*X+c*Z
				v := math.Exp(-0.5 * (u*u/sq(sigma[0]) + Y*Y/sq(sigma[1]) + w*w/sq(sigma[2])))
				k.Set(x, y, z, v)
			}
		}
	}
	return normalizeSum(k)
}

// normalizeSum scales k to sum 1 and returns it.
func normalizeSum(k *Dense) *Dense {
	sum := 0.0
	for _, v := range k.Data {
		sum += v
	}
	for i := range k.Data {
		k.Data[i] /= sum
	}
	return k
}
