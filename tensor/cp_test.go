package tensor

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// plantedCP returns Σ_r w_r a_r∘b_r∘c_r with random normal factors and weights in
// [1, 2), from a fixed seed.
func plantedCP(d [3]int, r int, seed uint64) *Dense {
	rng := rand.New(rand.NewPCG(seed, 99))
	k := New(d[0], d[1], d[2])
	for range r {
		var f [3][]float64
		for n := range 3 {
			f[n] = randomVector(d[n], rng)
		}
		k.AddScaled(1, Outer(1+rng.Float64(), f[0], f[1], f[2]))
	}
	return k
}

// TestCPALSRecoversPlanted: ALS recovers a planted sum of R ≤ 4 random rank-one terms
// to 1e-8 relative error.
// expected: exact recovery of a tensor of CP rank R with R terms (Kolda & Bader, SIAM
// Review 51(3), 2009, §3); the planted terms are the reference.
func TestCPALSRecoversPlanted(t *testing.T) {
	for _, tc := range []struct {
		d [3]int
		r int
	}{
		{[3]int{7, 6, 5}, 1}, {[3]int{7, 6, 5}, 2}, {[3]int{7, 6, 5}, 3}, {[3]int{7, 6, 5}, 4},
		{[3]int{9, 5, 3}, 3}, {[3]int{9, 5, 3}, 4}, {[3]int{4, 4, 4}, 4},
		{[3]int{11, 11, 11}, 4}, {[3]int{6, 6, 1}, 2}, {[3]int{5, 1, 1}, 1},
	} {
		for seed := uint64(1); seed <= 3; seed++ {
			a := plantedCP(tc.d, tc.r, seed)
			orig := a.Clone()
			c, err := CPALS(a, tc.r, CPOptions{Seed: seed})
			if err != nil {
				t.Fatal(err)
			}
			if c.RelError > 1e-8 || c.Degenerate {
				t.Errorf("%v R=%d seed %d: error %g degenerate %v after %d sweeps", tc.d, tc.r, seed, c.RelError, c.Degenerate, c.Iterations)
			}
			if e := Distance(a, c.Reconstruct()) / a.Norm(); math.Abs(e-c.RelError) > 1e-15 {
				t.Errorf("RelError %g, reconstruction says %g", c.RelError, e)
			}
			for n := range 3 {
				for r := range tc.r {
					if nv := mat.Norm(c.Factors[n].ColView(r), 2); math.Abs(nv-1) > 1e-12 {
						t.Errorf("factor %d column %d norm %g", n, r, nv)
					}
				}
			}
			for r := 1; r < tc.r; r++ {
				if math.Abs(c.Weights[r]) > math.Abs(c.Weights[r-1]) {
					t.Errorf("weights not sorted: %v", c.Weights)
				}
			}
			if Distance(a, orig) != 0 {
				t.Error("input modified")
			}
		}
	}
}

// TestCPLaplacianStructure checks the CP facts of the 7-point Laplacian stencil and the
// Laplacian of Gaussian, whose structure is a⊗a⊗b + a⊗b⊗a + b⊗a⊗a.
// expected: CP rank 3 with border rank 2, so 3 terms are exact and 2-term fits
// degenerate, their terms diverging and cancelling (V. de Silva, L.-H. Lim, SIAM J.
// Matrix Anal. Appl. 30(3), 2008; REFERENCES.md, checked numerically).
func TestCPLaplacianStructure(t *testing.T) {
	for name, a := range map[string]*Dense{
		"stencil": laplacianStencil(),
		"LoG":     laplacianOfGaussian(1.5, 6),
	} {
		t.Run(name, func(t *testing.T) {
			c3, err := CPALS(a, 3, CPOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if c3.RelError > 1e-12 || c3.Degenerate {
				t.Errorf("3 terms: error %g degenerate %v", c3.RelError, c3.Degenerate)
			}
			c2, err := CPALS(a, 2, CPOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if !c2.Degenerate {
				t.Errorf("2 terms not flagged degenerate: error %g, cancellation %g, congruence %g", c2.RelError, c2.Cancellation, c2.Congruence)
			}
			if c2.RelError < 1e-6 {
				t.Errorf("2 terms: error %g, want clearly inexact", c2.RelError)
			}
			c1, err := CPALS(a, 1, CPOptions{})
			if err != nil {
				t.Fatal(err)
			}
			if c1.Degenerate || c1.RelError < 1e-3 {
				t.Errorf("1 term: error %g degenerate %v", c1.RelError, c1.Degenerate)
			}
		})
	}
}

// TestCPDifferenceOfGaussians: a difference of Gaussians is exactly 2 terms, not
// degenerate although its two terms partly cancel.
// expected: CP rank 2 by construction (REFERENCES.md).
func TestCPDifferenceOfGaussians(t *testing.T) {
	for _, s2 := range []float64{1.6, 1.2, 3} {
		a := differenceOfGaussians(1, s2, 8)
		c, err := CPALS(a, 2, CPOptions{})
		if err != nil {
			t.Fatal(err)
		}
		if c.RelError > 1e-12 || c.Degenerate {
			t.Errorf("σ2 = %g: error %g degenerate %v cancellation %g", s2, c.RelError, c.Degenerate, c.Cancellation)
		}
	}
}

// TestCPDegenerateRatio: a fit whose terms sum to more than DegenerateRatio·‖a‖ is
// degenerate whatever its error (here two nearly equal Gaussians, an exact but badly
// cancelling pair).
func TestCPDegenerateRatio(t *testing.T) {
	a := differenceOfGaussians(1, 1.02, 6)
	c, err := CPALS(a, 2, CPOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if c.Cancellation <= DefaultDegenerateRatio || !c.Degenerate {
		t.Errorf("cancellation %g degenerate %v", c.Cancellation, c.Degenerate)
	}
	c, err = CPALS(a, 2, CPOptions{DegenerateRatio: 10 * c.Cancellation})
	if err != nil {
		t.Fatal(err)
	}
	if c.Degenerate {
		t.Errorf("degenerate with a raised ratio: cancellation %g", c.Cancellation)
	}
}

// TestCPALSReproducible: the same seed gives the same fit.
func TestCPALSReproducible(t *testing.T) {
	a := randomTensor(6, 5, 4, 21)
	c1, err := CPALS(a, 3, CPOptions{Seed: 7, MaxIter: 200})
	if err != nil {
		t.Fatal(err)
	}
	c2, _ := CPALS(a, 3, CPOptions{Seed: 7, MaxIter: 200})
	if c1.RelError != c2.RelError || c1.Weights[0] != c2.Weights[0] {
		t.Errorf("runs differ: %g vs %g", c1.RelError, c2.RelError)
	}
	// A random tensor's R-term fit cannot beat the bound from its unfoldings.
	h, _ := HOSVD(a)
	if lb := cpLowerBound(h.Values, a.Norm(), 3); c1.RelError < lb*(1-1e-12) {
		t.Errorf("error %g below the lower bound %g", c1.RelError, lb)
	}
}

func TestCPALSErrors(t *testing.T) {
	if _, err := CPALS(New(2, 2, 2), 1, CPOptions{}); err == nil {
		t.Error("zero tensor accepted")
	}
	if _, err := CPALS(randomTensor(2, 2, 2, 1), 0, CPOptions{}); err == nil {
		t.Error("zero terms accepted")
	}
}
