package tensor

import (
	"math"
	"testing"
)

// A separable kernel rounded to float32 is separable to float32's precision: with
// ExactZero = Float32ExactZero it is reported as such, while the float64 threshold sees
// the rounding noise as extra rank. Bound used: Weyl's inequality, rounding perturbs
// each singular value by at most ‖E‖_F ≤ 2⁻²⁴‖K‖_F (IEEE 754 binary32, round to nearest).
func TestFloat32KernelIsStillSeparable(t *testing.T) {
	g := func(sigma float64, r int) []float64 {
		v := make([]float64, 2*r+1)
		s := 0.0
		for i := range v {
			x := float64(i - r)
			v[i] = math.Exp(-x * x / (2 * sigma * sigma))
			s += v[i]
		}
		for i := range v {
			v[i] /= s
		}
		return v
	}
	k := Outer(1, g(1.5, 6), g(1.1, 4), g(2.3, 9))
	for i, v := range k.Data {
		k.Data[i] = float64(float32(v))
	}
	strict, err := Analyze(k, AnalyzeOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if strict.Separable {
		t.Fatalf("float64 threshold: rounding noise was expected to show as rank, got exact rank %v", strict.ExactRank)
	}
	loose, err := Analyze(k, AnalyzeOptions{ExactZero: Float32ExactZero})
	if err != nil {
		t.Fatal(err)
	}
	if !loose.Separable || loose.ExactRank != [3]int{1, 1, 1} {
		t.Errorf("float32 threshold: separable %v, exact rank %v; want true, (1,1,1)", loose.Separable, loose.ExactRank)
	}
	if loose.Chosen.Form != CP || loose.Chosen.Terms != 1 {
		t.Errorf("chosen %v with %d terms, want one CP term", loose.Chosen.Form, loose.Chosen.Terms)
	}
	// A kernel that is not separable stays so: the 7-point stencil has rank (2,2,2).
	lap, err := Analyze(Laplace7(), AnalyzeOptions{ExactZero: Float32ExactZero})
	if err != nil {
		t.Fatal(err)
	}
	if lap.Separable || lap.ExactRank != [3]int{2, 2, 2} {
		t.Errorf("Laplacian stencil: separable %v, exact rank %v; want false, (2,2,2)", lap.Separable, lap.ExactRank)
	}
}
