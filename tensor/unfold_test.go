package tensor

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// randomTensor returns an I×J×K tensor of standard normal values from a fixed seed.
func randomTensor(i, j, k int, seed uint64) *Dense {
	rng := rand.New(rand.NewPCG(seed, 7))
	t := New(i, j, k)
	for n := range t.Data {
		t.Data[n] = rng.NormFloat64()
	}
	return t
}

// TestUnfoldLayout checks the documented column order of every unfolding.
// expected: the mode-n unfolding of Kolda & Bader, SIAM Review 51(3), 2009, §2.4, whose
// column index for mode 0 is j + J·k, for mode 1 i + I·k and for mode 2 i + I·j.
func TestUnfoldLayout(t *testing.T) {
	a := New(2, 3, 4)
	for k := range 4 {
		for j := range 3 {
			for i := range 2 {
				a.Set(i, j, k, float64(100*i+10*j+k))
			}
		}
	}
	for _, tc := range []struct {
		mode     int
		rows     int
		cols     int
		rowCol   func(i, j, k int) (int, int)
		wantName string
	}{
		{0, 2, 12, func(i, j, k int) (int, int) { return i, j + 3*k }, "x"},
		{1, 3, 8, func(i, j, k int) (int, int) { return j, i + 2*k }, "y"},
		{2, 4, 6, func(i, j, k int) (int, int) { return k, i + 2*j }, "z"},
	} {
		t.Run(tc.wantName, func(t *testing.T) {
			u := Unfold(nil, a, tc.mode)
			if r, c := u.Dims(); r != tc.rows || c != tc.cols {
				t.Fatalf("dims %d×%d, want %d×%d", r, c, tc.rows, tc.cols)
			}
			for k := range 4 {
				for j := range 3 {
					for i := range 2 {
						r, c := tc.rowCol(i, j, k)
						if got := u.At(r, c); got != a.At(i, j, k) {
							t.Errorf("(%d,%d,%d) at (%d,%d) = %g, want %g", i, j, k, r, c, got, a.At(i, j, k))
						}
					}
				}
			}
			if back := Fold(u, tc.mode, a.Dims()); Distance(back, a) != 0 {
				t.Errorf("Fold(Unfold) differs from the tensor")
			}
		})
	}
}

// TestModeProduct checks t ×ₙ M against its definition (t ×ₙ M)₍ₙ₎ = M·t₍ₙ₎ and the
// property (t ×ₙ M) ×ₙ N = t ×ₙ (N·M) (De Lathauwer, De Moor & Vandewalle, SIAM J.
// Matrix Anal. Appl. 21(4), 2000; Kolda & Bader 2009, §2.5), on shapes with axes of one.
func TestModeProduct(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	randMat := func(r, c int) *mat.Dense {
		m := mat.NewDense(r, c, nil)
		for i := range r {
			for j := range c {
				m.Set(i, j, rng.NormFloat64())
			}
		}
		return m
	}
	for _, d := range [][3]int{{4, 3, 5}, {1, 6, 2}, {5, 1, 1}, {3, 3, 1}} {
		a := randomTensor(d[0], d[1], d[2], 11)
		orig := a.Clone()
		for mode := range 3 {
			m := randMat(3, d[mode])
			got := ModeProduct(a, mode, m)
			var want mat.Dense
			want.Mul(m, Unfold(nil, a, mode))
			if !mat.EqualApprox(Unfold(nil, got, mode), &want, 1e-12) {
				t.Errorf("%v mode %d: product differs from M·A(n)", d, mode)
			}
			n := randMat(2, 3)
			var nm mat.Dense
			nm.Mul(n, m)
			lhs := ModeProduct(got, mode, n)
			rhs := ModeProduct(a, mode, &nm)
			if e := Distance(lhs, rhs); e > 1e-12*lhs.Norm() {
				t.Errorf("%v mode %d: (A×M)×N differs from A×(NM) by %g", d, mode, e)
			}
		}
		if Distance(a, orig) != 0 {
			t.Errorf("%v: input modified", d)
		}
	}
}

func TestModePanics(t *testing.T) {
	a := New(2, 2, 2)
	for name, f := range map[string]func(){
		"bad mode":       func() { Unfold(nil, a, 3) },
		"bad dst":        func() { Unfold(mat.NewDense(2, 3, nil), a, 0) },
		"bad fold":       func() { Fold(mat.NewDense(2, 3, nil), 0, a.Dims()) },
		"bad product":    func() { ModeProduct(a, 1, mat.NewDense(2, 3, nil)) },
		"negative mode":  func() { ModeProduct(a, -1, mat.NewDense(2, 2, nil)) },
		"bad truncation": func() { (&TuckerDecomposition{Core: a}).Truncate([3]int{3, 1, 1}) },
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

func relDiff(a, b float64) float64 {
	return math.Abs(a-b) / math.Max(math.Abs(b), math.SmallestNonzeroFloat64)
}
