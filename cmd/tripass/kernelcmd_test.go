package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/tripass/tripass/tensor"
)

// denseDiff returns max |a − b| over the taps, or +Inf if the shapes differ.
func denseDiff(a, b *tensor.Dense) float64 {
	if a.Dims() != b.Dims() {
		return math.Inf(1)
	}
	d := 0.0
	for i := range a.Data {
		d = max(d, math.Abs(a.Data[i]-b.Data[i]))
	}
	return d
}

// TestKernelMakeEveryKind writes every built-in kernel as .npy and .txt and reads it
// back with loadKernel, comparing with the tensor package's constructors.
func TestKernelMakeEveryKind(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		args []string
		want *tensor.Dense
	}{
		{[]string{"gaussian", "--sigma", "1.5,1,0.5"}, tensor.GaussianPlan([3]float64{1.5, 1, 0.5}, [3]int{}).Kernel},
		{[]string{"gaussian", "--sigma", "2", "--order", "0,1,2", "--truncate", "3"},
			tensor.GaussianPlanTruncated([3]float64{2, 2, 2}, [3]int{0, 1, 2}, 3).Kernel},
		{[]string{"gaussian-d1", "--sigma", "1,1,2", "--axis", "z"}, tensor.GaussianPlan([3]float64{1, 1, 2}, [3]int{0, 0, 1}).Kernel},
		{[]string{"gaussian-d2", "--sigma", "1", "--axis", "y"}, tensor.GaussianPlan([3]float64{1, 1, 1}, [3]int{0, 2, 0}).Kernel},
		{[]string{"box", "--size", "3,5,1"}, tensor.BoxPlan([3]int{3, 5, 1}).Kernel},
		{[]string{"sobel", "--axis", "x"}, tensor.SobelPlan(0).Kernel},
		{[]string{"laplace7"}, tensor.Laplace7()},
		{[]string{"log", "--sigma", "1.2"}, tensor.LoGPlan([3]float64{1.2, 1.2, 1.2}).Kernel},
		{[]string{"dog", "--sigma", "1", "--sigma2", "1.6,1.6,1"}, tensor.DoGPlan([3]float64{1, 1, 1}, [3]float64{1.6, 1.6, 1}).Kernel},
		{[]string{"ball", "--radius", "3"}, tensor.Ball(3)},
		{[]string{"oriented-gaussian", "--sigma", "1,1,3", "--angles", "0,30,0"},
			tensor.OrientedGaussian([3]float64{1, 1, 3}, [3]float64{0, math.Pi / 6, 0}, 4)},
		{[]string{"oriented-gaussian", "--sigma", "1,2,1", "--angles=-20,0,45"},
			tensor.OrientedGaussian([3]float64{1, 2, 1}, [3]float64{-math.Pi / 9, 0, math.Pi / 4}, 4)},
	} {
		for _, ext := range []string{".npy", ".txt"} {
			name := strings.Join(tc.args, "_") + ext
			name = strings.NewReplacer(",", "-", "=", "").Replace(name)
			out := filepath.Join(dir, name)
			t.Run(name, func(t *testing.T) {
				code, _, stderr := runCLI(t, append(append([]string{"kernel", "make"}, tc.args...), "-o", out)...)
				if code != 0 {
					t.Fatalf("exit %d: %s", code, stderr)
				}
				if !strings.Contains(stderr, "wrote "+out) {
					t.Errorf("stderr %q does not report the file", stderr)
				}
				k, err := loadKernel(out)
				if err != nil {
					t.Fatal(err)
				}
				// Exact, but for the degree-to-radian conversion of --angles.
				if d := denseDiff(k, tc.want); d > 1e-15 {
					t.Errorf("read back differs by %g", d)
				}
			})
		}
	}
}

// TestKernelMakePhysicalUnits: sigmas in micrometres with --spacing are divided by the
// voxel size along each axis.
func TestKernelMakePhysicalUnits(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "a.npy"), filepath.Join(dir, "b.npy")
	if code, _, e := runCLI(t, "kernel", "make", "gaussian", "--sigma", "0.4,0.4,1.2um", "--spacing", "0.2,0.2,0.6um", "-o", a); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := runCLI(t, "kernel", "make", "gaussian", "--sigma", "2", "-o", b); code != 0 {
		t.Fatal(e)
	}
	if code, _, e := runCLI(t, "kernel", "make", "box", "--size", "3", "-o", filepath.Join(dir, "q.txt"), "--quiet"); code != 0 || e != "" {
		t.Errorf("--quiet: exit %d, stderr %q", code, e)
	}
	ka, _ := loadKernel(a)
	kb, _ := loadKernel(b)
	if d := denseDiff(ka, kb); d > 1e-15 {
		t.Errorf("0.4,0.4,1.2 µm at 0.2,0.2,0.6 µm differs from 2 voxels by %g", d)
	}
}

// TestOrientedGaussianPhysicalUnits: on cubic voxels physical sigmas are sigmas in
// voxels; on anisotropic voxels with zero angles the Gaussian is the axis-aligned one
// with each sigma divided by its voxel size; and turning it keeps the physical widths
// (the kernel's second moments, in physical units, are R·diag(σ²)·Rᵀ).
func TestOrientedGaussianPhysicalUnits(t *testing.T) {
	dir := t.TempDir()
	mk := func(name string, args ...string) *tensor.Dense {
		p := filepath.Join(dir, name)
		if code, _, e := runCLI(t, append(append([]string{"kernel", "make", "oriented-gaussian"}, args...), "-o", p)...); code != 0 {
			t.Fatal(e)
		}
		k, err := loadKernel(p)
		if err != nil {
			t.Fatal(err)
		}
		return k
	}
	a := mk("a.npy", "--sigma", "0.5,0.5,1.5um", "--spacing", "0.5um", "--angles", "10,20,30")
	b := mk("b.npy", "--sigma", "1,1,3", "--angles", "10,20,30")
	if d := denseDiff(a, b); d > 1e-15 {
		t.Errorf("cubic voxels: differs from the voxel version by %g", d)
	}
	c := mk("c.npy", "--sigma", "0.4,0.6,2um", "--spacing", "0.2,0.2,1um")
	want := tensor.GaussianPlan([3]float64{2, 3, 2}, [3]int{}).Kernel
	if d := denseDiff(c, want); d > 1e-15 {
		t.Errorf("anisotropic voxels, no turn: differs from Gaussian 2,3,2 voxels by %g", d)
	}
	// Turned 30° about y on 0.2×0.2×0.4 µm voxels, wide truncation so the sampled moments
	// match the continuous ones.
	sp := [3]float64{0.2, 0.2, 0.4}
	d := mk("d.npy", "--sigma", "0.3,0.3,0.9um", "--spacing", "0.2,0.2,0.4um", "--angles", "0,30,0", "--truncate", "7")
	cov := tensor.OrientedCovariance([3]float64{0.3, 0.3, 0.9}, [3]float64{0, math.Pi / 6, 0})
	var got [3][3]float64
	for z := range d.K {
		for y := range d.J {
			for x := range d.I {
				p := [3]float64{float64(x-d.I/2) * sp[0], float64(y-d.J/2) * sp[1], float64(z-d.K/2) * sp[2]}
				for i := range 3 {
					for j := range 3 {
						got[i][j] += p[i] * p[j] * d.At(x, y, z)
					}
				}
			}
		}
	}
	for i := range 3 {
		for j := range 3 {
			if math.Abs(got[i][j]-cov[i][j]) > 1e-6 {
				t.Errorf("physical moment (%d,%d) = %.8f, want %.8f", i, j, got[i][j], cov[i][j])
			}
		}
	}
}

// TestLoadKernelNumPyLayout loads kernel files saved by numpy.save with the impulse
// responses of scipy.ndimage filters, which checks the axis convention: a 3D array is
// (kz, ky, kx), a 2D array (ky, kx), a 1D array along x.
// expected: scipy.ndimage.gaussian_filter and sobel, SciPy 1.10.1 / NumPy 1.24 (Debian
// 12), via scripts/make_kernel_fixtures.py.
func TestLoadKernelNumPyLayout(t *testing.T) {
	gdx := tensor.GaussianPlan([3]float64{1.0, 1.5, 0.7}, [3]int{1, 0, 0}).Kernel
	for _, tc := range []struct {
		file string
		want *tensor.Dense
		tol  float64
	}{
		{"gauss_dx_C.npy", gdx, 1e-15},
		{"gauss_dx_F_f4.npy", gdx, 1e-7}, // big-endian float32, Fortran order
		{"sobel2d_x.npy", tensor.Outer(1, []float64{1, 0, -1}, []float64{1, 2, 1}, []float64{1}), 0},
		{"row5.npy", tensor.Outer(1, []float64{1. / 16, 4. / 16, 6. / 16, 4. / 16, 1. / 16}, []float64{1}, []float64{1}), 0},
	} {
		t.Run(tc.file, func(t *testing.T) {
			k, err := loadKernel(filepath.Join("testdata", "kernels", tc.file))
			if err != nil {
				t.Fatal(err)
			}
			if d := denseDiff(k, tc.want); d > tc.tol {
				t.Errorf("dims %v (want %v), differs by %g", k.Dims(), tc.want.Dims(), d)
			}
		})
	}
}

// TestKernelMakeLoadsInNumPy cross-checks with SciPy itself when /usr/bin/python3 has
// it (Debian's python3-scipy): numpy.load of a kernel we write equals the impulse
// response of scipy.ndimage.gaussian_filter with the same sigma and order, axes
// reversed. Skips otherwise.
func TestKernelMakeLoadsInNumPy(t *testing.T) {
	const python = "/usr/bin/python3"
	if testing.Short() {
		t.Skip("-short")
	}
	if _, err := os.Stat(python); err != nil {
		t.Skip("no " + python)
	}
	dir := t.TempDir()
	cases := []struct{ sigma, order string }{
		{"1.3,0.8,2", "0,0,0"},
		{"1.3,0.8,2", "1,0,0"},
		{"0.9,1.7,1.1", "0,2,1"},
	}
	pyArgs := []string{"-c", `
import sys, numpy as np
from scipy import ndimage
for path, sigma, order in zip(*[iter(sys.argv[1:])] * 3):
    k = np.load(path)
    s = [float(v) for v in sigma.split(",")][::-1]
    o = [int(v) for v in order.split(",")][::-1]
    imp = np.zeros(k.shape)
    imp[tuple(n // 2 for n in k.shape)] = 1
    ref = ndimage.gaussian_filter(imp, s, order=o, mode="constant")
    print(np.abs(k - ref).max() / np.abs(ref).max())
`}
	for i, tc := range cases {
		out := filepath.Join(dir, fmt.Sprintf("g%d.npy", i))
		args := []string{"kernel", "make", "gaussian", "--sigma", tc.sigma, "--order", tc.order, "-o", out}
		if i == 2 {
			args = append(args, "--float32")
		}
		if code, _, e := runCLI(t, args...); code != 0 {
			t.Fatal(e)
		}
		pyArgs = append(pyArgs, out, tc.sigma, tc.order)
	}
	out, err := exec.Command(python, pyArgs...).CombinedOutput()
	if err != nil {
		if strings.Contains(string(out), "ModuleNotFoundError") {
			t.Skip("no NumPy or SciPy for " + python)
		}
		t.Fatalf("%v: %s", err, out)
	}
	fields := strings.Fields(string(out))
	if len(fields) != len(cases) {
		t.Fatalf("python printed %q", out)
	}
	for i, tc := range cases {
		var rel float64
		if _, err := fmt.Sscan(fields[i], &rel); err != nil {
			t.Fatalf("%q: %v", fields[i], err)
		}
		tol := 1e-14
		if i == 2 {
			tol = 1e-7 // float32 file
		}
		if rel > tol {
			t.Errorf("sigma %s order %s: relative difference from SciPy %g", tc.sigma, tc.order, rel)
		}
	}
}

func inspectJSONOf(t *testing.T, args ...string) map[string]any {
	t.Helper()
	code, out, stderr := runCLI(t, args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var m map[string]any
	if err := json.Unmarshal([]byte(out), &m); err != nil {
		t.Fatalf("not JSON: %v\n%s", err, out)
	}
	return m
}

func floats(v any) []float64 {
	var out []float64
	for _, x := range v.([]any) {
		out = append(out, x.(float64))
	}
	return out
}

// TestKernelInspectGaussianJSON: a sampled 3D Gaussian is rank one (REFERENCES.md: an
// axis-aligned sampled Gaussian has multilinear rank 1); its plan is one CP term costing
// kx+ky+kz = 3k multiply-adds against k³ direct (common practice: 39 against 2197 for
// 13³). Flags go before or after the file.
func TestKernelInspectGaussianJSON(t *testing.T) {
	dir := t.TempDir()
	g := filepath.Join(dir, "g.npy")
	if code, _, e := runCLI(t, "kernel", "make", "-o", g, "gaussian", "--sigma", "1.5"); code != 0 {
		t.Fatal(e)
	}
	for _, args := range [][]string{
		{"kernel", "inspect", g, "--json"},
		{"kernel", "inspect", "--json", g},
		{"kernel", "inspect", "--tolerance", "1e-6", g, "--json"},
	} {
		m := inspectJSONOf(t, args...)
		if s := floats(m["shape"]); !slices.Equal(s, []float64{13, 13, 13}) {
			t.Errorf("%v: shape %v", args, s)
		}
		if m["separable"] != true {
			t.Errorf("%v: separable %v", args, m["separable"])
		}
		if r := floats(m["multilinear_rank"]); !slices.Equal(r, []float64{1, 1, 1}) {
			t.Errorf("multilinear_rank %v", r)
		}
		msv := m["mode_singular_values"].(map[string]any)
		for _, axis := range []string{"x", "y", "z"} {
			v := floats(msv[axis])
			if len(v) != 13 || !slices.IsSortedFunc(v, func(a, b float64) int { return -cmpFloat(a, b) }) {
				t.Errorf("%s singular values %v not 13 descending", axis, v)
			}
			// ‖K‖² = Σ σᵢ² in every mode (De Lathauwer et al. 2000, Property 8).
			ss := 0.0
			for _, s := range v {
				ss += s * s
			}
			if n := m["norm"].(float64); math.Abs(ss-n*n) > 1e-12*n*n {
				t.Errorf("%s: Σσ² = %g, ‖K‖² = %g", axis, ss, n*n)
			}
		}
		plan := m["plan"].(map[string]any)
		if plan["form"] != "cp" || plan["terms"] != 1.0 || plan["macs_per_voxel"] != 39.0 {
			t.Errorf("plan %v, want cp with 1 term and 39 macs", plan)
		}
		if plan["order"] != "xyz" || plan["relative_error"].(float64) > 1e-12 {
			t.Errorf("plan %v", plan)
		}
		if sp := plan["speedup"].(float64); math.Abs(sp-2197.0/39) > 1e-9 {
			t.Errorf("speedup %g, want %g", sp, 2197.0/39)
		}
		opts := m["options"].([]any)
		direct := opts[0].(map[string]any)
		if direct["form"] != "direct" || direct["macs_per_voxel"] != 2197.0 {
			t.Errorf("first option %v, want direct with 2197 macs", direct)
		}
		for _, o := range opts {
			o := o.(map[string]any)
			for _, key := range []string{"form", "terms", "order", "relative_error", "macs_per_voxel"} {
				if _, ok := o[key]; !ok {
					t.Errorf("option %v lacks %s", o, key)
				}
			}
			if o["form"] == "tucker" {
				if _, ok := o["ranks"]; !ok {
					t.Errorf("tucker option %v lacks ranks", o)
				}
			}
		}
	}
}

func cmpFloat(a, b float64) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

// TestKernelInspectLaplace7: the 7-point stencil has multilinear rank (2,2,2) and is
// exactly 3 separable terms (REFERENCES.md, de Silva & Lim 2008); with 7 direct taps no
// separable form is cheaper, so the plan is direct. Its n-mode singular values are
// √(21 ± √433) and 0 in every mode (REFERENCES.md, checked numerically with NumPy).
func TestKernelInspectLaplace7(t *testing.T) {
	dir := t.TempDir()
	l := filepath.Join(dir, "l.txt")
	if code, _, e := runCLI(t, "kernel", "make", "laplace7", "-o", l); code != 0 {
		t.Fatal(e)
	}
	m := inspectJSONOf(t, "kernel", "inspect", l, "--json")
	if r := floats(m["multilinear_rank"]); !slices.Equal(r, []float64{2, 2, 2}) {
		t.Errorf("multilinear_rank %v, want [2 2 2]", r)
	}
	if m["separable"] != false {
		t.Error("the 7-point stencil reported separable")
	}
	want := []float64{math.Sqrt(21 + math.Sqrt(433)), math.Sqrt(21 - math.Sqrt(433))}
	for _, axis := range []string{"x", "y", "z"} {
		v := floats(m["mode_singular_values"].(map[string]any)[axis])
		if math.Abs(v[0]-want[0]) > 1e-12 || math.Abs(v[1]-want[1]) > 1e-12 || (len(v) > 2 && v[2] > 1e-12) {
			t.Errorf("%s: %v, want %v and 0", axis, v, want)
		}
	}
	plan := m["plan"].(map[string]any)
	if plan["form"] != "direct" || plan["macs_per_voxel"] != 7.0 {
		t.Errorf("plan %v, want direct with 7 macs", plan)
	}
	exact3 := false
	for _, o := range m["options"].([]any) {
		o := o.(map[string]any)
		if o["form"] == "cp" && o["terms"] == 3.0 && o["relative_error"].(float64) < 1e-12 {
			exact3 = true
		}
		if o["form"] == "cp" && o["terms"] == 2.0 && o["degenerate"] != true && o["relative_error"].(float64) < 1e-6 {
			t.Errorf("a 2-term CP fit within 1e-6 not marked degenerate: %v", o)
		}
	}
	if !exact3 {
		t.Error("no exact 3-term CP option")
	}
}

func TestKernelInspectText(t *testing.T) {
	dir := t.TempDir()
	s := filepath.Join(dir, "s.npy")
	if code, _, e := runCLI(t, "kernel", "make", "sobel", "--axis", "y", "-o", s); code != 0 {
		t.Fatal(e)
	}
	code, out, e := runCLI(t, "kernel", "inspect", s)
	if code != 0 {
		t.Fatal(e)
	}
	for _, want := range []string{
		"shape      3×3×3 taps (x×y×z), 18 non-zero",
		"multilinear rank  (1,1,1)",
		"separable  yes",
		"← chosen",
		"plan       cp, 1 separable term: 9 multiply-adds per voxel against 18 direct, predicted speed-up 2.0×",
	} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q:\n%s", want, out)
		}
	}
}

// TestKernelInspectFactors: the --factors file's terms sum back to the kernel, within
// the plan's error, for a CP, a Tucker and a direct plan.
func TestKernelInspectFactors(t *testing.T) {
	dir := t.TempDir()
	for _, tc := range []struct {
		make []string
		tol  string
		form string
	}{
		{[]string{"dog", "--sigma", "1", "--sigma2", "1.6"}, "1e-6", "cp"},
		{[]string{"oriented-gaussian", "--sigma", "1,1,3", "--angles", "0,30,0"}, "1e-3", "tucker"},
		{[]string{"ball", "--radius", "2"}, "1e-6", "direct"},
	} {
		t.Run(tc.make[0], func(t *testing.T) {
			k := filepath.Join(dir, tc.make[0]+".npy")
			f := filepath.Join(dir, tc.make[0]+".json")
			if code, _, e := runCLI(t, append(append([]string{"kernel", "make"}, tc.make...), "-o", k)...); code != 0 {
				t.Fatal(e)
			}
			if code, _, e := runCLI(t, "kernel", "inspect", k, "--tolerance", tc.tol, "--factors", f); code != 0 {
				t.Fatal(e)
			}
			b, err := os.ReadFile(f)
			if err != nil {
				t.Fatal(err)
			}
			var fj factorsJSON
			if err := json.Unmarshal(b, &fj); err != nil {
				t.Fatal(err)
			}
			if fj.Form != tc.form {
				t.Fatalf("form %s, want %s", fj.Form, tc.form)
			}
			kernel, _ := loadKernel(k)
			if fj.Shape != kernel.Dims() || fj.Center != [3]int{kernel.I / 2, kernel.J / 2, kernel.K / 2} {
				t.Errorf("shape %v center %v for a %v kernel", fj.Shape, fj.Center, kernel.Dims())
			}
			sum := tensor.New(fj.Shape[0], fj.Shape[1], fj.Shape[2])
			if fj.Form == "direct" {
				copy(sum.Data, fj.Kernel)
			}
			for _, term := range fj.Terms {
				sum.AddScaled(1, tensor.Outer(1, term.X, term.Y, term.Z))
			}
			sum.AddScaled(-1, kernel)
			rel := sum.Norm() / kernel.Norm()
			if math.Abs(rel-fj.RelError) > 1e-9 {
				t.Errorf("terms rebuild the kernel to %g, the file says %g", rel, fj.RelError)
			}
			if fj.Form == "tucker" && len(fj.Branches) == 0 {
				t.Error("tucker factors lack the branches")
			}
			// Without --overwrite an existing factors file is kept.
			if code, _, _ := runCLI(t, "kernel", "inspect", k, "--factors", f); code != ExitUsage {
				t.Errorf("existing --factors file: exit %d, want %d", code, ExitUsage)
			}
		})
	}
}

func TestKernelErrors(t *testing.T) {
	dir := t.TempDir()
	bad := filepath.Join(dir, "bad.npy")
	os.WriteFile(bad, []byte("\x93NUMPY\x01\x00\x10\x00{'descr': '<f8'"), 0o644)
	nan := filepath.Join(dir, "nan.txt")
	os.WriteFile(nan, []byte("1 2\n3 4 5\n"), 0o644)
	big := filepath.Join(dir, "big.npy")
	os.WriteFile(big, npyFile("(2000, 3, 3)", 8), 0o644)
	four := filepath.Join(dir, "four.npy")
	os.WriteFile(four, npyFile("(1, 1, 1, 1)", 8), 0o644)
	existing := filepath.Join(dir, "existing.npy")
	os.WriteFile(existing, []byte("keep me"), 0o644)
	for _, tc := range []struct {
		args []string
		code int
		msg  string
	}{
		{[]string{"kernel", "make", "nosuch", "-o", "x.npy"}, ExitUsage, `unknown kernel "nosuch"`},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1"}, ExitUsage, "-o FILE"},
		{[]string{"kernel", "make", "gaussian", "-o", filepath.Join(dir, "g.npy")}, ExitUsage, "needs --sigma"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1", "--radius", "2", "-o", filepath.Join(dir, "g.npy")}, ExitUsage, "--radius does not apply"},
		{[]string{"kernel", "make", "box", "--size", "4", "-o", filepath.Join(dir, "b.npy")}, ExitUsage, "odd"},
		{[]string{"kernel", "make", "sobel", "--axis", "w", "-o", filepath.Join(dir, "s.npy")}, ExitUsage, "--axis"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1", "-o", filepath.Join(dir, "g.tif")}, ExitUsage, ".npy or .txt"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1um", "-o", filepath.Join(dir, "g.npy")}, ExitUsage, "--spacing"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "300", "-o", filepath.Join(dir, "g.npy")}, ExitUsage, "limit"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1", "--order", "1,0,0", "--axis", "x", "-o", filepath.Join(dir, "g.npy")}, ExitUsage, "--axis does not apply"},
		{[]string{"kernel", "make", "gaussian", "--sigma", "1", "-o", existing}, ExitUsage, "already exists"},
		{[]string{"kernel", "make", "laplace7", "--float32", "-o", filepath.Join(dir, "l.txt")}, ExitUsage, "--float32 applies to .npy"},
		{[]string{"kernel", "inspect"}, ExitUsage, "one kernel FILE"},
		{[]string{"kernel", "inspect", filepath.Join(dir, "none.npy")}, ExitInput, "none.npy: no such file"},
		{[]string{"kernel", "inspect", bad}, ExitInput, "bad.npy"},
		{[]string{"kernel", "inspect", nan}, ExitInput, "nan.txt: kerneltext: line 2"},
		{[]string{"kernel", "inspect", big}, ExitInput, "more than 1023 taps"},
		{[]string{"kernel", "inspect", four}, ExitInput, "1, 2 or 3 axes"},
		{[]string{"kernel", "inspect", existing + ".raw"}, ExitUsage, ".npy or .txt"},
		{[]string{"kernel", "inspect", bad, "--tolerance", "0"}, ExitUsage, "--tolerance"},
	} {
		t.Run(strings.Join(tc.args[1:], " "), func(t *testing.T) {
			code, _, stderr := runCLI(t, tc.args...)
			if code != tc.code {
				t.Errorf("exit %d, want %d (%s)", code, tc.code, stderr)
			}
			if !strings.Contains(stderr, tc.msg) {
				t.Errorf("stderr %q lacks %q", stderr, tc.msg)
			}
			if n := strings.Count(strings.TrimSpace(stderr), "\n"); n > 0 {
				t.Errorf("error spans %d lines: %q", n+1, stderr)
			}
		})
	}
	if b, _ := os.ReadFile(existing); string(b) != "keep me" {
		t.Error("an existing output was modified")
	}
	if m, _ := filepath.Glob(filepath.Join(dir, ".tripass-part-*")); len(m) > 0 {
		t.Errorf("temporary files left behind: %v", m)
	}
}

// npyFile returns a version 1.0 '<f8' .npy file of the given shape literal, followed by
// n data bytes, laid out as NEP 1 describes.
func npyFile(shape string, n int) []byte {
	dict := "{'descr': '<f8', 'fortran_order': False, 'shape': " + shape + ", }"
	pad := 64 - (10+len(dict)+1)%64
	h := dict + strings.Repeat(" ", pad) + "\n"
	b := append([]byte("\x93NUMPY\x01\x00"), byte(len(h)), byte(len(h)>>8))
	b = append(b, h...)
	return append(b, make([]byte, n)...)
}

// TestLoadKernelEvenSizes: even sizes load as they are; their origin is tap n/2
// (tensor.Center), as the help says.
func TestLoadKernelEvenSizes(t *testing.T) {
	p := filepath.Join(t.TempDir(), "e.txt")
	os.WriteFile(p, []byte("1 2 3 4\n5 6 7 8\n"), 0o644)
	k, err := loadKernel(p)
	if err != nil {
		t.Fatal(err)
	}
	if k.Dims() != [3]int{4, 2, 1} || k.At(tensor.Center(4), tensor.Center(2), 0) != 7 {
		t.Errorf("dims %v, origin tap %g", k.Dims(), k.At(2, 1, 0))
	}
}

func TestKernelHelp(t *testing.T) {
	for _, args := range [][]string{{"kernel", "make", "--help"}, {"kernel", "inspect", "--help"}, {"kernel", "--help"}} {
		code, out, _ := runCLI(t, args...)
		if code != 0 {
			t.Errorf("%v: exit %d", args, code)
		}
		if !strings.Contains(out, "(kz, ky, kx)") || !strings.Contains(out, "n/2") {
			t.Errorf("%v: help lacks the file layout and centring rule:\n%s", args, out)
		}
	}
}

// BenchmarkKernelInspect31 runs 'kernel inspect' end to end on 31³-sized kernels: a
// Gaussian (rank one), a digital ball (no cheaper form) and a tilted anisotropic
// Gaussian (Tucker). Issue 3 asks for under a second each on this project's machine.
func BenchmarkKernelInspect31(b *testing.B) {
	dir := b.TempDir()
	for _, k := range []struct {
		name string
		args []string
	}{
		{"gaussian", []string{"gaussian", "--sigma", "3.75"}},
		{"ball", []string{"ball", "--radius", "15"}},
		{"oriented", []string{"oriented-gaussian", "--sigma", "2.5,2.5,3.7", "--angles", "0,30,0", "--truncate", "4.2"}},
	} {
		path := filepath.Join(dir, k.name+".npy")
		var out, errb strings.Builder
		if code := run(append(append([]string{"tripass", "kernel", "make"}, k.args...), "-o", path), &out, &errb); code != 0 {
			b.Fatal(errb.String())
		}
		b.Run(k.name, func(b *testing.B) {
			for b.Loop() {
				var out, errb strings.Builder
				if code := run([]string{"tripass", "kernel", "inspect", path, "--json"}, &out, &errb); code != 0 {
					b.Fatal(errb.String())
				}
			}
		})
	}
}
