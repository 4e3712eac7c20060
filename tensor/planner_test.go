package tensor

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"
)

// analyze runs Analyze and checks what every analysis must satisfy: each option's plan
// reconstructs to within its stated error, Macs agrees with the plan, the chosen plan
// is within tolerance and not degenerate, and the kernel is left unchanged.
func analyze(t *testing.T, k *Dense, opt AnalyzeOptions) *Analysis {
	t.Helper()
	orig := k.Clone()
	a, err := Analyze(k, opt)
	if err != nil {
		t.Fatal(err)
	}
	if Distance(k, orig) != 0 {
		t.Error("kernel modified")
	}
	for _, o := range a.Options {
		p := o.Plan
		e := Distance(k, p.Reconstruct()) / a.Norm
		if math.Abs(e-o.RelError) > 1e-12+1e-9*o.RelError || p.RelError != o.RelError {
			t.Errorf("%v %d terms %v: RelError %g, reconstruction %g", o.Form, o.Terms, o.Ranks, o.RelError, e)
		}
		if o.Form == Tucker && o.RelError > o.Bound*(1+1e-9)+1e-13 { // 1e-13: rounding in the reconstruction
			t.Errorf("tucker %v %v: error %g above the bound %g", o.Ranks, o.Order, o.RelError, o.Bound)
		}
		if o.Macs != p.Macs() {
			t.Errorf("%v: Macs %d, plan %d", o.Form, o.Macs, p.Macs())
		}
		if o.Form == Tucker && k.Dims() != [3]int{1, 1, 1} {
			if m := tuckerMacs(k.Dims(), o.Ranks, o.Order); m != o.Macs {
				t.Errorf("tucker %v %v: Macs %d, cost model %d", o.Ranks, o.Order, o.Macs, m)
			}
		}
		if o.Form == CP {
			if m := o.Terms * (passMacs(k.I) + passMacs(k.J) + passMacs(k.K)); m != o.Macs && k.Dims() != [3]int{1, 1, 1} {
				t.Errorf("cp %d terms: Macs %d, cost model %d", o.Terms, o.Macs, m)
			}
		}
	}
	c := a.Chosen
	if c == nil {
		t.Fatal("nothing chosen")
	}
	if c.Degenerate || (c.RelError > a.Tolerance && opt.Force == nil) {
		t.Errorf("chosen %v with error %g degenerate %v", c.Form, c.RelError, c.Degenerate)
	}
	if e := Distance(k, c.Plan.Reconstruct()) / a.Norm; a.Norm > 0 && e > a.Tolerance && opt.Force == nil {
		t.Errorf("chosen plan reconstructs with error %g", e)
	}
	return a
}

// option returns the first option matching form, terms (CP) and order (Tucker), or nil.
func option(a *Analysis, form Form, terms int) *Option {
	for i := range a.Options {
		if o := &a.Options[i]; o.Form == form && (terms == 0 || o.Terms == terms) {
			return o
		}
	}
	return nil
}

// TestCostModelCheckValues: a rank-one k×k×k kernel costs 3k multiply-adds per voxel
// against k³ direct (33 against 1331 for 11³); a flat k×k kernel 2k against k² (6
// against 9 for 3×3, 22 against 121 for 11×11); a 1D kernel of k taps k either way,
// which leaves direct chosen.
// expected: common practice (the check values).
func TestCostModelCheckValues(t *testing.T) {
	for _, tc := range []struct {
		name           string
		k              *Dense
		direct, chosen int
		form           Form
	}{
		{"gaussian 11³", gaussian3D([3]float64{1.5, 1.5, 1.5}, [3]int{5, 5, 5}), 1331, 33, CP},
		{"gaussian 11×9×7", gaussian3D([3]float64{1.5, 1.2, 1}, [3]int{5, 4, 3}), 693, 27, CP},
		{"binomial 3×3", Outer(1.0/16, []float64{1, 2, 1}, []float64{1, 2, 1}, []float64{1}), 9, 6, CP},
		{"gaussian 11×11", gaussian3D([3]float64{2, 2, 1}, [3]int{5, 5, 0}), 121, 22, CP},
		{"gaussian 1×11×11", gaussian3D([3]float64{1, 2, 2}, [3]int{0, 5, 5}), 121, 22, CP},
		{"line 7", Outer(2, []float64{1, 2, 3, 4, 3, 2, 1}, []float64{1}, []float64{1}), 7, 7, Direct},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := analyze(t, tc.k, AnalyzeOptions{})
			if !a.Separable {
				t.Errorf("not separable; exact rank %v", a.ExactRank)
			}
			if a.DirectMacs != tc.direct || a.Chosen.Macs != tc.chosen || a.Chosen.Form != tc.form {
				t.Errorf("direct %d, chosen %v at %d; want %d, %v at %d", a.DirectMacs, a.Chosen.Form, a.Chosen.Macs, tc.direct, tc.form, tc.chosen)
			}
			if o := option(a, CP, 1); o == nil || o.RelError > 1e-14 || o.Macs != tc.chosen {
				t.Errorf("CP 1 term option %+v", o)
			}
		})
	}
}

// TestSeparableKernels: a sampled 3D Gaussian (sampled in 3D, not built from 1D kernels)
// and the 3D Sobel kernel are rank one.
// expected: exp(−½Σ xᵢ²/σᵢ²) = Π exp(−xᵢ²/2σᵢ²); Sobel is [−1,0,1]⊗[1,2,1]⊗[1,2,1] by
// definition (REFERENCES.md).
func TestSeparableKernels(t *testing.T) {
	for name, k := range map[string]*Dense{
		"gaussian": gaussian3D([3]float64{1, 2, 0.7}, [3]int{4, 8, 3}),
		"sobel":    sobel3D(),
	} {
		t.Run(name, func(t *testing.T) {
			a := analyze(t, k, AnalyzeOptions{})
			if !a.Separable || a.ExactRank != [3]int{1, 1, 1} || a.MultilinearRank != [3]int{1, 1, 1} {
				t.Errorf("separable %v, exact rank %v", a.Separable, a.ExactRank)
			}
			if a.Chosen.Form != CP || a.Chosen.Terms != 1 || a.Chosen.RelError > 1e-14 {
				t.Errorf("chosen %v %d terms error %g", a.Chosen.Form, a.Chosen.Terms, a.Chosen.RelError)
			}
		})
	}
}

// TestPlanLaplacian: the stencil and the Laplacian of Gaussian have multilinear rank
// (2,2,2) and are exact with 3 CP terms, whose 2-term fits are degenerate and never
// chosen. The 7-tap stencil stays direct (7 < 27); the 13³ LoG takes 3 terms (117
// against 2197).
// expected: REFERENCES.md (de Silva & Lim 2008; checked numerically).
func TestPlanLaplacian(t *testing.T) {
	for _, tc := range []struct {
		name string
		k    *Dense
		form Form
	}{
		{"stencil", laplacianStencil(), Direct},
		{"LoG", laplacianOfGaussian(1.5, 6), CP},
	} {
		t.Run(tc.name, func(t *testing.T) {
			a := analyze(t, tc.k, AnalyzeOptions{})
			if a.Separable || a.ExactRank != [3]int{2, 2, 2} || a.MultilinearRank != [3]int{2, 2, 2} {
				t.Errorf("separable %v exact rank %v multilinear rank %v", a.Separable, a.ExactRank, a.MultilinearRank)
			}
			if o := option(a, CP, 2); o == nil || !o.Degenerate {
				t.Errorf("2-term option %+v, want degenerate", o)
			}
			if o := option(a, CP, 3); o == nil || o.Degenerate || o.RelError > 1e-12 {
				t.Errorf("3-term option %+v, want exact", o)
			}
			if a.Chosen.Form != tc.form {
				t.Errorf("chosen %v, want %v", a.Chosen.Form, tc.form)
			}
			if tc.form == CP && a.Chosen.Terms != 3 {
				t.Errorf("chosen %d terms, want 3", a.Chosen.Terms)
			}
		})
	}
}

// TestPlanFloat32Kernel: a kernel stored in float32 carries rounding noise of about
// 6e-8 relative, so it is no longer exactly of low rank, but within the default
// tolerance it still plans as its structure says: the LoG as 3 CP terms, with
// multilinear rank (2,2,2) at the tolerance and its 2-term fits still degenerate.
// expected: REFERENCES.md (LoG structure); float32 rounding is IEEE 754 binary32.
func TestPlanFloat32Kernel(t *testing.T) {
	for _, n := range []int{15, 31} {
		k := laplacianOfGaussian(float64(n)/9, n/2)
		for i, v := range k.Data {
			k.Data[i] = float64(float32(v))
		}
		a := analyze(t, k, AnalyzeOptions{})
		if a.Separable || a.ExactRank == [3]int{2, 2, 2} || a.MultilinearRank != [3]int{2, 2, 2} {
			t.Errorf("%d³: exact rank %v, multilinear rank %v", n, a.ExactRank, a.MultilinearRank)
		}
		if a.Chosen.Form != CP || a.Chosen.Terms != 3 || a.Chosen.RelError > 1e-7 {
			t.Errorf("%d³: chosen %v %d terms error %g", n, a.Chosen.Form, a.Chosen.Terms, a.Chosen.RelError)
		}
		if o := option(a, CP, 2); o == nil || !o.Degenerate {
			t.Errorf("%d³: 2-term option %+v, want degenerate", n, o)
		}
	}
}

// TestPlanDifferenceOfGaussians: 2 CP terms, multilinear rank (2,2,2).
// expected: REFERENCES.md.
func TestPlanDifferenceOfGaussians(t *testing.T) {
	a := analyze(t, differenceOfGaussians(1, 1.6, 7), AnalyzeOptions{})
	if a.ExactRank != [3]int{2, 2, 2} {
		t.Errorf("exact rank %v", a.ExactRank)
	}
	if a.Chosen.Form != CP || a.Chosen.Terms != 2 || a.Chosen.RelError > 1e-12 {
		t.Errorf("chosen %v %d terms error %g", a.Chosen.Form, a.Chosen.Terms, a.Chosen.RelError)
	}
}

// TestPlanBall: a digital ball of radius 5 (11³, 515 taps) has exact multilinear rank
// (5,5,5) and nothing cheaper than direct.
// expected: REFERENCES.md (checked numerically).
func TestPlanBall(t *testing.T) {
	k := digitalBall(11, 5)
	if k.NonZero() != 515 {
		t.Fatalf("ball has %d taps, want 515", k.NonZero())
	}
	a := analyze(t, k, AnalyzeOptions{})
	if a.ExactRank != [3]int{5, 5, 5} || a.Chosen.Form != Direct || a.Chosen.Macs != 515 {
		t.Errorf("exact rank %v, chosen %v at %d", a.ExactRank, a.Chosen.Form, a.Chosen.Macs)
	}
}

// TestPlanTiltedGaussian: a Gaussian with sigmas (1,1,3) voxels tilted 30° about y on a
// 15³ grid needs Tucker ranks (9,1,9) for a relative error of 4.4e-4, costing 405
// multiply-adds with x first and 285 with y first, against 3375 direct; the planner
// passes y first.
// expected: REFERENCES.md (checked numerically with NumPy 1.24).
func TestPlanTiltedGaussian(t *testing.T) {
	k := tiltedGaussian(15, [3]float64{1, 1, 3}, 30)
	h, err := HOSVD(k)
	if err != nil {
		t.Fatal(err)
	}
	r := [3]int{9, 1, 9}
	if e := Distance(k, h.Truncate(r).Reconstruct()) / k.Norm(); math.Abs(e-4.4e-4) > 0.05e-4 {
		t.Errorf("(9,1,9) error %.3g, want 4.4e-4", e)
	}
	if x, y := tuckerMacs(k.Dims(), r, XYZ), tuckerMacs(k.Dims(), r, YXZ); x != 405 || y != 285 {
		t.Errorf("(9,1,9) costs %d x first, %d y first; want 405, 285", x, y)
	}
	for _, tol := range []float64{4.5e-4, 1e-6} {
		a := analyze(t, k, AnalyzeOptions{Tolerance: tol})
		if a.DirectMacs != 3375 || a.Chosen.Form != Tucker || a.Chosen.Order != YXZ || a.Chosen.Ranks[1] != 1 {
			t.Errorf("tol %g: chosen %v %v ranks %v; direct %d", tol, a.Chosen.Form, a.Chosen.Order, a.Chosen.Ranks, a.DirectMacs)
		}
		if tol == 4.5e-4 && a.Chosen.Macs > 285 {
			t.Errorf("tol %g: chosen costs %d, want at most 285", tol, a.Chosen.Macs)
		}
		var xyz, yxz *Option
		for i := range a.Options {
			o := &a.Options[i]
			if o.Form == Tucker && o.Ranks == a.Chosen.Ranks {
				if o.Order == XYZ {
					xyz = o
				} else {
					yxz = o
				}
			}
		}
		if xyz == nil || yxz == nil || xyz.Macs <= yxz.Macs {
			t.Errorf("tol %g: both orders not listed, or x first not dearer", tol)
		}
	}
	// The same kernel tilted about x instead (swap x and y) prefers x first.
	sw := permute(k, [3]int{1, 0, 2})
	a := analyze(t, sw, AnalyzeOptions{})
	if a.Chosen.Form != Tucker || a.Chosen.Order != XYZ {
		t.Errorf("swapped: chosen %v %v", a.Chosen.Form, a.Chosen.Order)
	}
}

// TestRankSearch: the cheapest rank triple found from the prefix sums has the error the
// truncation really has, and no triple of lower cost meets the tolerance.
func TestRankSearch(t *testing.T) {
	k := tiltedGaussian(9, [3]float64{1, 1.3, 2.5}, 40)
	h, err := HOSVD(k)
	if err != nil {
		t.Fatal(err)
	}
	s := newRankSearch(h.Core, k.Norm())
	for _, tol := range []float64{1e-1, 1e-3, 1e-6} {
		for _, order := range []Order{XYZ, YXZ} {
			r, ok := s.cheapest(k.Dims(), order, tol)
			if !ok {
				t.Fatalf("tol %g: nothing found", tol)
			}
			if e := Distance(k, h.Truncate(r).Reconstruct()) / k.Norm(); e > tol*(1+1e-9) {
				t.Errorf("tol %g %v: ranks %v error %g", tol, order, r, e)
			}
			m := tuckerMacs(k.Dims(), r, order)
			d := h.Ranks()
			for a := 1; a <= d[0]; a++ {
				for b := 1; b <= d[1]; b++ {
					for c := 1; c <= d[2]; c++ {
						q := [3]int{a, b, c}
						if tuckerMacs(k.Dims(), q, order) >= m {
							continue
						}
						if e := Distance(k, h.Truncate(q).Reconstruct()) / k.Norm(); e <= tol*(1-1e-9) {
							t.Errorf("tol %g %v: %v costs less than %v and has error %g", tol, order, q, r, e)
						}
					}
				}
			}
		}
	}
}

// TestPlanShapes runs the planner on kernels with axes of one tap and checks the
// generic invariants (see analyze) and that passes along axes of one tap are free.
func TestPlanShapes(t *testing.T) {
	for _, d := range [][3]int{{1, 1, 1}, {5, 1, 1}, {1, 6, 1}, {1, 1, 4}, {5, 4, 1}, {1, 5, 5}, {4, 1, 5}, {6, 5, 4}} {
		t.Run(fmt.Sprint(d), func(t *testing.T) {
			k := randomTensor(d[0], d[1], d[2], 77)
			a := analyze(t, k, AnalyzeOptions{})
			for _, o := range a.Options {
				for _, b := range o.Plan.Branches {
					for _, l := range b.Leaves {
						for _, taps := range [][]float64{b.First, l.Second, l.Z} {
							if len(taps) == 1 && taps[0] != 1 && d != [3]int{1, 1, 1} {
								t.Errorf("%v %v: a one-tap pass %v was not folded", o.Form, o.Order, taps)
							}
						}
					}
				}
			}
		})
	}
	// A 1×1×1 kernel: direct costs 1; a CP plan [c] costs 1 as well, and the identity
	// costs nothing.
	a := analyze(t, Outer(3, []float64{1}, []float64{1}, []float64{1}), AnalyzeOptions{})
	if a.Chosen.Form != Direct || a.Chosen.Macs != 1 {
		t.Errorf("[3]: chosen %v at %d", a.Chosen.Form, a.Chosen.Macs)
	}
	a = analyze(t, Outer(1, []float64{1}, []float64{1}, []float64{1}), AnalyzeOptions{})
	if a.Chosen.Macs != 0 {
		t.Errorf("identity: chosen %v at %d", a.Chosen.Form, a.Chosen.Macs)
	}
}

// TestReconstructMatchesPlan: the fast reconstruction used to measure errors equals
// Plan.Reconstruct for Tucker plans in both orders and for CP plans.
func TestReconstructMatchesPlan(t *testing.T) {
	k := randomTensor(5, 4, 3, 8)
	h, err := HOSVD(k)
	if err != nil {
		t.Fatal(err)
	}
	cp, err := CPALS(k, 2, CPOptions{MaxIter: 20})
	if err != nil {
		t.Fatal(err)
	}
	for _, p := range []*Plan{tuckerPlan(k, h.Truncate([3]int{3, 2, 2}), XYZ), tuckerPlan(k, h.Truncate([3]int{3, 2, 2}), YXZ), cpPlan(k, cp)} {
		if e := Distance(reconstruct(p), p.Reconstruct()); e > 1e-14*k.Norm() {
			t.Errorf("%v %v: reconstructions differ by %g", p.Form, p.Order, e)
		}
	}
}

func TestForce(t *testing.T) {
	k := tiltedGaussian(11, [3]float64{1, 1, 2.5}, 30)
	for _, f := range []Form{Direct, CP, Tucker} {
		a := analyze(t, k, AnalyzeOptions{Force: &f})
		if a.Chosen.Form != f {
			t.Errorf("forced %v, chose %v", f, a.Chosen.Form)
		}
	}
}

func TestAnalyzeErrors(t *testing.T) {
	nan := New(2, 2, 2)
	nan.Data[3] = math.NaN()
	for name, tc := range map[string]struct {
		k   *Dense
		opt AnalyzeOptions
	}{
		"nil":            {nil, AnalyzeOptions{}},
		"NaN":            {nan, AnalyzeOptions{}},
		"inf":            {Outer(math.Inf(1), []float64{1}, []float64{1}, []float64{1}), AnalyzeOptions{}},
		"short data":     {&Dense{I: 2, J: 2, K: 2, Data: make([]float64, 7)}, AnalyzeOptions{}},
		"negative tol":   {New(2, 2, 2), AnalyzeOptions{Tolerance: -1}},
		"zero dimension": {&Dense{I: 0, J: 2, K: 2}, AnalyzeOptions{}},
	} {
		if _, err := Analyze(tc.k, tc.opt); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
	// A zero kernel is direct with nothing to do.
	a := analyze(t, New(3, 3, 3), AnalyzeOptions{})
	if a.Chosen.Form != Direct || a.Chosen.Macs != 0 {
		t.Errorf("zero kernel: chosen %v at %d", a.Chosen.Form, a.Chosen.Macs)
	}
}

// BenchmarkAnalyze31 analyses 31³ kernels: a tilted anisotropic Gaussian (sigmas 2,2,6
// voxels, 30° about y), a random one and a Laplacian of Gaussian. The issue asks for
// well under a second.
func BenchmarkAnalyze31(b *testing.B) { benchmarkAnalyze(b, 31) }

// BenchmarkAnalyze61 does the same at 61³, the largest kernels expected.
func BenchmarkAnalyze61(b *testing.B) { benchmarkAnalyze(b, 61) }

func benchmarkAnalyze(b *testing.B, n int) {
	rng := rand.New(rand.NewPCG(31, 31))
	random := New(n, n, n)
	for i := range random.Data {
		random.Data[i] = rng.NormFloat64()
	}
	s := float64(n) / 31
	for _, bc := range []struct {
		name string
		k    *Dense
	}{
		{"tilted", tiltedGaussian(n, [3]float64{2 * s, 2 * s, 6 * s}, 30)},
		{"random", random},
		{"LoG", laplacianOfGaussian(3.5*s, n/2)},
	} {
		b.Run(bc.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Analyze(bc.k, AnalyzeOptions{}); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

// TestAnalyzeRandomTucker is a property test (fixed seeds): a kernel made as a random
// core of multilinear rank r times random factors has exact multilinear rank r, and
// the planner's choice is within tolerance and costs no more than applying that Tucker
// form exactly in the better order, or directly.
// expected: the multilinear rank of core ×ₙ factors with generic factors is the core's
// (De Lathauwer et al. 2000); the cost model of the issue.
func TestAnalyzeRandomTucker(t *testing.T) {
	rng := rand.New(rand.NewPCG(17, 17))
	for trial := range 30 {
		var d, r [3]int
		for n := range 3 {
			d[n] = 1 + rng.IntN(12)
			r[n] = 1 + rng.IntN(min(d[n], 4))
		}
		for n := range 3 {
			r[n] = min(r[n], r[(n+1)%3]*r[(n+2)%3])
		}
		k := randomTensor(r[0], r[1], r[2], uint64(trial))
		for n := range 3 {
			f := randomTensor(d[n], r[n], 1, uint64(1000+3*trial+n))
			m := Unfold(nil, f, 0) // d[n] × r[n] random normal
			k = ModeProduct(k, n, m)
		}
		a := analyze(t, k, AnalyzeOptions{Seed: uint64(trial)})
		if a.ExactRank != r {
			t.Errorf("trial %d %v: exact rank %v, want %v", trial, d, a.ExactRank, r)
		}
		limit := min(tuckerMacs(d, r, XYZ), tuckerMacs(d, r, YXZ), a.DirectMacs)
		if a.Chosen.Macs > limit {
			t.Errorf("trial %d %v ranks %v: chosen %v %v at %d, want at most %d", trial, d, r, a.Chosen.Form, a.Chosen.Ranks, a.Chosen.Macs, limit)
		}
	}
}

// TestAnalyzePlantedCP: a kernel made of R ≤ 4 random separable terms plans as R CP
// terms, R·(kx+ky+kz) multiply-adds, cheaper than any Tucker form of it.
// expected: exact recovery of a planted CP tensor (Kolda & Bader 2009); the issue's
// cost model.
func TestAnalyzePlantedCP(t *testing.T) {
	for r := 1; r <= 4; r++ {
		k := plantedCP([3]int{9, 11, 7}, r, uint64(40+r))
		a := analyze(t, k, AnalyzeOptions{})
		if a.Chosen.Form != CP || a.Chosen.Terms != r || a.Chosen.Macs != r*27 || a.Chosen.RelError > 1e-8 {
			t.Errorf("R=%d: chosen %v %d terms at %d, error %g", r, a.Chosen.Form, a.Chosen.Terms, a.Chosen.Macs, a.Chosen.RelError)
		}
	}
}

// TestAnalyzeScaleInvariant: scaling a kernel by 1e±200 changes neither its ranks nor
// the plan chosen, nor any relative error by more than rounding.
// expected: every quantity the planner compares is relative to ‖K‖ (common practice).
func TestAnalyzeScaleInvariant(t *testing.T) {
	k := tiltedGaussian(9, [3]float64{1, 1, 2}, 30)
	base := analyze(t, k, AnalyzeOptions{Tolerance: 1e-4})
	for _, s := range []float64{1e200, 1e-200} {
		ks := k.Clone()
		for i := range ks.Data {
			ks.Data[i] *= s
		}
		a := analyze(t, ks, AnalyzeOptions{Tolerance: 1e-4})
		if a.MultilinearRank != base.MultilinearRank || a.ExactRank != base.ExactRank ||
			a.Chosen.Form != base.Chosen.Form || a.Chosen.Ranks != base.Chosen.Ranks || a.Chosen.Order != base.Chosen.Order ||
			math.Abs(a.Chosen.RelError-base.Chosen.RelError) > 1e-12 {
			t.Errorf("scale %g: rank %v/%v chosen %v %v %v error %g; unscaled rank %v chosen %v %v %v error %g", s,
				a.MultilinearRank, a.ExactRank, a.Chosen.Form, a.Chosen.Ranks, a.Chosen.Order, a.Chosen.RelError,
				base.MultilinearRank, base.Chosen.Form, base.Chosen.Ranks, base.Chosen.Order, base.Chosen.RelError)
		}
		for i, o := range a.Options {
			if o.Form == Tucker && math.Abs(o.Bound-base.Options[i].Bound) > 1e-12 {
				t.Errorf("scale %g: bound %g, unscaled %g", s, o.Bound, base.Options[i].Bound)
			}
		}
	}
}
