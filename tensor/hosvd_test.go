package tensor

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// numpyFixtures is tensor/testdata/hosvd_numpy.json, made by
// scripts/make_tensor_fixtures.py.
type numpyFixtures struct {
	Generator string      `json:"generator"`
	Cases     []numpyCase `json:"cases"`
}

// numpyCase is one tensor and NumPy's values for it.
type numpyCase struct {
	Name               string            `json:"name"`
	Shape              [3]int            `json:"shape"`
	Data               []float64         `json:"data"`
	ModeSingularValues [3][]float64      `json:"mode_singular_values"`
	Truncations        []numpyTruncation `json:"truncations"`
}

// numpyTruncation is the relative error of NumPy's truncated HOSVD at Ranks.
type numpyTruncation struct {
	Ranks    [3]int  `json:"ranks"`
	RelError float64 `json:"rel_error"`
}

func loadNumPyFixtures(t *testing.T) *numpyFixtures {
	t.Helper()
	b, err := os.ReadFile("testdata/hosvd_numpy.json")
	if err != nil {
		t.Fatal(err)
	}
	var f numpyFixtures
	if err := json.Unmarshal(b, &f); err != nil {
		t.Fatal(err)
	}
	if len(f.Cases) == 0 {
		t.Fatal("no fixture cases")
	}
	return &f
}

// TestModeSingularValuesMatchNumPy compares the n-mode singular values and the errors
// of truncated HOSVDs with NumPy's.
// expected: numpy.linalg.svd of each unfolding, NumPy 1.24 (Debian 12), via
// scripts/make_tensor_fixtures.py. Values agree to 1e-10 relative; values at the
// rounding floor (below 1e-14 of the largest, as in a rank-deficient case) only to that
// floor.
func TestModeSingularValuesMatchNumPy(t *testing.T) {
	checkAgainstNumPy(t, loadNumPyFixtures(t))
}

// checkAgainstNumPy compares the HOSVD of every case with NumPy's values in f.
func checkAgainstNumPy(t *testing.T, f *numpyFixtures) {
	t.Helper()
	for _, c := range f.Cases {
		t.Run(c.Name, func(t *testing.T) {
			a := &Dense{I: c.Shape[0], J: c.Shape[1], K: c.Shape[2], Data: c.Data}
			h, err := HOSVD(a)
			if err != nil {
				t.Fatal(err)
			}
			for n := range 3 {
				want := c.ModeSingularValues[n]
				got := h.Values[n]
				if len(got) != len(want) {
					t.Fatalf("mode %d: %d values, want %d", n, len(got), len(want))
				}
				for i := range want {
					if math.Abs(got[i]-want[i]) > 1e-10*want[i]+1e-14*want[0] {
						t.Errorf("mode %d value %d = %.17g, want %.17g (numpy)", n, i, got[i], want[i])
					}
				}
			}
			for _, tr := range c.Truncations {
				e := Distance(a, h.Truncate(tr.Ranks).Reconstruct()) / a.Norm()
				if tr.RelError < 1e-12 {
					if e > 1e-12 {
						t.Errorf("ranks %v: error %g, want exact (numpy %g)", tr.Ranks, e, tr.RelError)
					}
				} else if relDiff(e, tr.RelError) > 1e-10 {
					t.Errorf("ranks %v: error %.15g, want %.15g (numpy)", tr.Ranks, e, tr.RelError)
				}
			}
		})
	}
}

// TestHOSVDProperties checks, on random and structured tensors, the properties of the
// HOSVD stated by De Lathauwer, De Moor & Vandewalle (SIAM J. Matrix Anal. Appl. 21(4),
// 2000, Theorem 2 and the norm property): the core is all-orthogonal (two different
// slices along a mode are orthogonal), ordered (the slice norms along mode n are the
// n-mode singular values, non-increasing), ‖A‖² = Σᵢ (σᵢ⁽ⁿ⁾)² for every n = ‖S‖², the
// factors are orthonormal and the decomposition reconstructs A.
func TestHOSVDProperties(t *testing.T) {
	cases := map[string]*Dense{
		"random 6x5x4": randomTensor(6, 5, 4, 1),
		"random 3x8x2": randomTensor(3, 8, 2, 2),
		"random 9x2x2": randomTensor(9, 2, 2, 3), // mode 0 longer than the others' product
		"flat 5x4x1":   randomTensor(5, 4, 1, 4),
		"laplacian":    laplacianStencil(),
		"tilted":       tiltedGaussian(9, [3]float64{1, 1, 2}, 30),
	}
	for name, a := range cases {
		t.Run(name, func(t *testing.T) {
			orig := a.Clone()
			h, err := HOSVD(a)
			if err != nil {
				t.Fatal(err)
			}
			norm2 := sq(a.Norm())
			if e := Distance(a, h.Reconstruct()); e > 1e-13*a.Norm() {
				t.Errorf("reconstruction error %g", e)
			}
			if d := sq(h.Core.Norm()) - norm2; math.Abs(d) > 1e-12*norm2 {
				t.Errorf("‖S‖² − ‖A‖² = %g", d)
			}
			for n := range 3 {
				s := 0.0
				for i, v := range h.Values[n] {
					s += v * v
					if i > 0 && v > h.Values[n][i-1] {
						t.Errorf("mode %d values not descending: %v", n, h.Values[n])
					}
				}
				if math.Abs(s-norm2) > 1e-12*norm2 {
					t.Errorf("mode %d: Σσ² = %.17g, ‖A‖² = %.17g", n, s, norm2)
				}
				var g mat.Dense
				g.Mul(h.Factors[n].T(), h.Factors[n])
				_, c := h.Factors[n].Dims()
				if !mat.EqualApprox(&g, eye(c), 1e-12) {
					t.Errorf("mode %d factor not orthonormal", n)
				}
				// All-orthogonality and ordering: the Gram matrix of the core's
				// mode-n slices is diag(σ⁽ⁿ⁾²).
				var gram mat.Dense
				u := Unfold(nil, h.Core, n)
				gram.Mul(u, u.T())
				r, _ := gram.Dims()
				for p := range r {
					for q := range r {
						want := 0.0
						if p == q {
							want = sq(h.Values[n][p])
						}
						if math.Abs(gram.At(p, q)-want) > 1e-12*norm2 {
							t.Errorf("mode %d slices %d,%d: inner product %g, want %g", n, p, q, gram.At(p, q), want)
						}
					}
				}
			}
			if Distance(a, orig) != 0 {
				t.Error("input modified")
			}
		})
	}
}

func eye(n int) *mat.Dense {
	m := mat.NewDense(n, n, nil)
	for i := range n {
		m.Set(i, i, 1)
	}
	return m
}

// TestTruncationBound is a property test on random tensors (fixed seeds): for random
// ranks, the true error of the truncated HOSVD lies between bound/√3 and the bound
// √(Σ_modes Σ discarded σ²), and so does the sequentially truncated HOSVD's.
// expected: the truncation bound of De Lathauwer et al. (2000); the same bound for the
// ST-HOSVD and the lower end (any approximation of multilinear rank r has squared error
// at least the largest single-mode discarded sum, hence at least a third of the bound)
// from Vannieuwenhoven, Vandebril & Meerbergen, SIAM J. Sci. Comput. 34(2), 2012.
func TestTruncationBound(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	for trial := range 40 {
		d := [3]int{2 + rng.IntN(7), 2 + rng.IntN(7), 1 + rng.IntN(6)}
		a := randomTensor(d[0], d[1], d[2], uint64(100+trial))
		if trial%2 == 1 {
			// Graded spectra, closer to kernels than white noise.
			for k := range d[2] {
				for j := range d[1] {
					for i := range d[0] {
						a.Set(i, j, k, a.At(i, j, k)*math.Pow(0.3, float64(i+j+k)))
					}
				}
			}
		}
		h, err := HOSVD(a)
		if err != nil {
			t.Fatal(err)
		}
		full := h.Ranks()
		r := [3]int{1 + rng.IntN(full[0]), 1 + rng.IntN(full[1]), 1 + rng.IntN(full[2])}
		// A multilinear rank never exceeds the product of the other two.
		for n := range 3 {
			r[n] = min(r[n], r[(n+1)%3]*r[(n+2)%3])
		}
		bound := TruncationBound(h.Values, r)
		e := Distance(a, h.Truncate(r).Reconstruct())
		if e > bound*(1+1e-12)+1e-14 || e < bound/math.Sqrt(3)*(1-1e-12) {
			t.Errorf("trial %d %v ranks %v: HOSVD error %g outside [%g, %g]", trial, d, r, e, bound/math.Sqrt(3), bound)
		}
		st, err := STHOSVDRanks(a, r)
		if err != nil {
			t.Fatal(err)
		}
		if st.Ranks() != r {
			t.Errorf("ST-HOSVD ranks %v, want %v", st.Ranks(), r)
		}
		es := Distance(a, st.Reconstruct())
		if es > bound*(1+1e-12)+1e-14 || es < bound/math.Sqrt(3)*(1-1e-12) {
			t.Errorf("trial %d %v ranks %v: ST-HOSVD error %g outside [%g, %g]", trial, d, r, es, bound/math.Sqrt(3), bound)
		}
	}
}

// TestSTHOSVDTolerance checks the ST-HOSVD rank rule: keeping in each mode the smallest
// rank whose discarded squared singular values are at most tol²‖A‖²/3 gives a relative
// error of at most tol (Vannieuwenhoven et al. 2012).
func TestSTHOSVDTolerance(t *testing.T) {
	for _, tol := range []float64{0.5, 0.1, 1e-2, 1e-4, 1e-8} {
		for name, a := range map[string]*Dense{
			"random": randomTensor(7, 6, 5, 9),
			"tilted": tiltedGaussian(11, [3]float64{1, 1.5, 3}, 30),
		} {
			st, err := STHOSVD(a, tol)
			if err != nil {
				t.Fatal(err)
			}
			e := Distance(a, st.Reconstruct()) / a.Norm()
			if e > tol {
				t.Errorf("%s tol %g: ranks %v error %g", name, tol, st.Ranks(), e)
			}
		}
	}
	if _, err := STHOSVD(New(2, 2, 2), -1); err == nil {
		t.Error("negative tolerance accepted")
	}
}

// TestLaplacianStencilSpectrum checks the 7-point Laplacian stencil L = d∘e∘e + e∘d∘e +
// e∘e∘d, e = [0,1,0], d = [1,−2,1].
// expected (REFERENCES.md, checked numerically with NumPy 1.24): multilinear rank
// (2,2,2); n-mode singular values √(21 ± √433) = 6.465961, 0.437433 and 0 in every mode,
// squares summing to 42 = ‖L‖²; truncation to (1,1,1): true squared error 0.279148,
// bound 0.574044.
func TestLaplacianStencilSpectrum(t *testing.T) {
	l := laplacianStencil()
	h, err := HOSVD(l)
	if err != nil {
		t.Fatal(err)
	}
	want := []float64{math.Sqrt(21 + math.Sqrt(433)), math.Sqrt(21 - math.Sqrt(433)), 0}
	for n := range 3 {
		for i, w := range want {
			if math.Abs(h.Values[n][i]-w) > 1e-12 {
				t.Errorf("mode %d value %d = %.15g, want %.15g", n, i, h.Values[n][i], w)
			}
		}
		if r := NumericalRank(h.Values[n]); r != 2 {
			t.Errorf("mode %d numerical rank %d, want 2", n, r)
		}
	}
	if math.Abs(h.Values[0][0]-6.465961) > 5e-7 || math.Abs(h.Values[0][1]-0.437433) > 5e-7 {
		t.Errorf("values %v, want 6.465961 and 0.437433", h.Values[0])
	}
	one := [3]int{1, 1, 1}
	if e2 := sq(Distance(l, h.Truncate(one).Reconstruct())); math.Abs(e2-0.279148) > 5e-7 {
		t.Errorf("(1,1,1) squared error %.7f, want 0.279148", e2)
	}
	if b2 := sq(TruncationBound(h.Values, one)); math.Abs(b2-0.574044) > 5e-7 {
		t.Errorf("(1,1,1) squared bound %.7f, want 0.574044", b2)
	}
	if got := RanksForTolerance(h.Values, l.Norm(), 1e-6); got != [3]int{2, 2, 2} {
		t.Errorf("multilinear rank at 1e-6 %v, want [2 2 2]", got)
	}
}

func TestNumericalRank(t *testing.T) {
	for _, tc := range []struct {
		s    []float64
		want int
	}{
		{nil, 0},
		{[]float64{0, 0}, 0},
		{[]float64{3}, 1},
		{[]float64{1, 1e-11, 1e-13}, 2},
		{[]float64{1, 0.5, 1e-12}, 2},
	} {
		if got := NumericalRank(tc.s); got != tc.want {
			t.Errorf("NumericalRank(%v) = %d, want %d", tc.s, got, tc.want)
		}
	}
}

func ExampleHOSVD() {
	// The 7-point Laplacian stencil: a sum of three second differences.
	e, d := []float64{0, 1, 0}, []float64{1, -2, 1}
	l := Outer(1, d, e, e)
	l.AddScaled(1, Outer(1, e, d, e))
	l.AddScaled(1, Outer(1, e, e, d))
	h, err := HOSVD(l)
	if err != nil {
		panic(err)
	}
	for n, axis := range []string{"x", "y", "z"} {
		fmt.Printf("%s: %.6f %.6f numerical rank %d\n", axis, h.Values[n][0], h.Values[n][1], NumericalRank(h.Values[n]))
	}
	// Output:
	// x: 6.465961 0.437433 numerical rank 2
	// y: 6.465961 0.437433 numerical rank 2
	// z: 6.465961 0.437433 numerical rank 2
}
