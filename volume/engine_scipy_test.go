package volume

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/tripass/tripass/tensor"
)

// Fixtures made by scripts/make_engine_fixtures.py with NumPy 1.24 and SciPy 1.10.1
// (Debian 12). Each case names the scipy.ndimage function that made its expected output.

type fixtureKernel struct {
	Kind      string      `json:"kind"`
	X         []float64   `json:"x"`
	Y         []float64   `json:"y"`
	Z         []float64   `json:"z"`
	Shape     [3]int      `json:"shape"`
	Data      []float64   `json:"data"`
	Terms     []fixtureCP `json:"terms"`
	CoreShape [3]int      `json:"core_shape"`
	Core      []float64   `json:"core"`
	UX        [][]float64 `json:"ux"`
	UY        [][]float64 `json:"uy"`
	UZ        [][]float64 `json:"uz"`
}

type fixtureCP struct {
	X, Y, Z []float64
}

type fixtureCase struct {
	Name      string        `json:"name"`
	Volume    string        `json:"volume"`
	Kernel    fixtureKernel `json:"kernel"`
	Mode      string        `json:"mode"`
	Cval      float64       `json:"cval"`
	Expected  string        `json:"expected"`
	Reference string        `json:"reference"`
}

type fixtureManifest struct {
	SciPy   string `json:"scipy"`
	Volumes map[string]struct {
		File  string `json:"file"`
		Shape [3]int `json:"shape"`
	} `json:"volumes"`
	Cases []fixtureCase `json:"cases"`
}

const fixtureDir = "testdata/engine"

func readF32(t testing.TB, path string) []float32 {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	v := make([]float32, len(b)/4)
	for i := range v {
		v[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return v
}

// scipyEdge maps SciPy's mode names to tripass's edges (SciPy's reflect is the
// half-sample symmetric extension, its mirror the whole-sample one).
func scipyEdge(mode string) Edge {
	switch mode {
	case "reflect":
		return EdgeSymmetric
	case "mirror":
		return EdgeReflect
	case "nearest":
		return EdgeReplicate
	case "wrap":
		return EdgePeriodic
	case "constant":
		return EdgeConstant
	}
	panic("unknown SciPy mode " + mode)
}

func densePlan(k *tensor.Dense) *tensor.Plan {
	return &tensor.Plan{Form: tensor.Direct, Kernel: k}
}

func cpPlan(terms []fixtureCP) *tensor.Plan {
	p := &tensor.Plan{Form: tensor.CP, Order: tensor.XYZ}
	for _, tm := range terms {
		p.Branches = append(p.Branches, tensor.Branch{First: tm.X, Leaves: []tensor.Leaf{{Second: tm.Y, Z: tm.Z}}})
	}
	d0 := tensor.Outer(1, terms[0].X, terms[0].Y, terms[0].Z)
	p.Kernel = d0 // shape only; Reconstruct gives the sum
	p.Kernel = p.Reconstruct()
	return p
}

// tuckerPlans builds the Tucker plan core ×₁ UX ×₂ UY ×₃ UZ by hand, in both pass orders.
func tuckerPlans(k fixtureKernel) (xyz, yxz *tensor.Plan) {
	r := k.CoreShape
	core := func(a, b, c int) float64 { return k.Core[a+r[0]*(b+r[1]*c)] }
	nz := len(k.UZ[0])
	zfold := func(a, b int) []float64 {
		z := make([]float64, nz)
		for c := 0; c < r[2]; c++ {
			for i := range z {
				z[i] += core(a, b, c) * k.UZ[c][i]
			}
		}
		return z
	}
	xyz = &tensor.Plan{Form: tensor.Tucker, Order: tensor.XYZ, Ranks: r}
	for a := 0; a < r[0]; a++ {
		br := tensor.Branch{First: k.UX[a]}
		for b := 0; b < r[1]; b++ {
			br.Leaves = append(br.Leaves, tensor.Leaf{Second: k.UY[b], Z: zfold(a, b)})
		}
		xyz.Branches = append(xyz.Branches, br)
	}
	yxz = &tensor.Plan{Form: tensor.Tucker, Order: tensor.YXZ, Ranks: r}
	for b := 0; b < r[1]; b++ {
		br := tensor.Branch{First: k.UY[b]}
		for a := 0; a < r[0]; a++ {
			br.Leaves = append(br.Leaves, tensor.Leaf{Second: k.UX[a], Z: zfold(a, b)})
		}
		yxz.Branches = append(yxz.Branches, br)
	}
	xyz.Kernel = tensor.New(len(k.UX[0]), len(k.UY[0]), nz)
	xyz.Kernel = xyz.Reconstruct()
	yxz.Kernel = xyz.Kernel
	return xyz, yxz
}

// sobelPlans are the three Sobel derivative plans in kernel (convolution) order:
// SciPy's sobel correlates with [-1, 0, 1], which is convolution with [1, 0, -1].
func sobelPlans() []*tensor.Plan {
	d, s := []float64{1, 0, -1}, []float64{1, 2, 1}
	return []*tensor.Plan{
		tensor.SeparablePlan(1, d, s, s),
		tensor.SeparablePlan(1, s, d, s),
		tensor.SeparablePlan(1, s, s, d),
	}
}

// variant is one way of running a fixture case through the engine.
type variant struct {
	name    string
	plans   []*tensor.Plan
	combine Combine
	scale   []float64
}

func caseVariants(k fixtureKernel) []variant {
	switch k.Kind {
	case "separable":
		p := tensor.SeparablePlan(1, k.X, k.Y, k.Z)
		vs := []variant{{"separable", []*tensor.Plan{p}, CombineNone, nil}}
		// The same kernel tap by tap, except the 61³ one (227k taps: slow, no news).
		if len(p.Kernel.Data) <= 10000 {
			vs = append(vs, variant{"direct", []*tensor.Plan{densePlan(p.Kernel)}, CombineNone, nil})
		}
		return vs
	case "dense":
		d := &tensor.Dense{I: k.Shape[0], J: k.Shape[1], K: k.Shape[2], Data: k.Data}
		return []variant{{"direct", []*tensor.Plan{densePlan(d)}, CombineNone, nil}}
	case "cp":
		p := cpPlan(k.Terms)
		return []variant{
			{"cp", []*tensor.Plan{p}, CombineNone, nil},
			{"direct", []*tensor.Plan{densePlan(p.Kernel)}, CombineNone, nil},
		}
	case "tucker":
		xyz, yxz := tuckerPlans(k)
		return []variant{
			{"tucker-xyz", []*tensor.Plan{xyz}, CombineNone, nil},
			{"tucker-yxz", []*tensor.Plan{yxz}, CombineNone, nil},
		}
	case "sobel_magnitude":
		ps := sobelPlans()
		direct := make([]*tensor.Plan, len(ps))
		for i, p := range ps {
			direct[i] = densePlan(p.Kernel)
		}
		sc := []float64{1.0 / 32, 1.0 / 32, 1.0 / 32}
		return []variant{
			{"separable", ps, CombineMagnitude, sc},
			{"direct", direct, CombineMagnitude, sc},
		}
	}
	panic("unknown fixture kernel kind " + k.Kind)
}

func loadManifest(t *testing.T) fixtureManifest {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(fixtureDir, "manifest.json"))
	if err != nil {
		t.Fatal(err)
	}
	var m fixtureManifest
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	return m
}

// runFilter filters data (nx×ny×nz float32) and returns the float32 output.
func runFilter(t testing.TB, shape [3]int, data []float32, plans []*tensor.Plan, combine Combine, opt FilterOptions) []float32 {
	t.Helper()
	h := Header{NX: shape[0], NY: shape[1], NZ: shape[2], Type: Float32}
	var sink MemSink
	st, err := Filter(&sink, NewMemSource(h, data), Float32, plans, combine, opt)
	if err != nil {
		t.Fatal(err)
	}
	if st.Slices != shape[2] || sink.Slices != shape[2] {
		t.Fatalf("wrote %d slices (stats %d), want %d", sink.Slices, st.Slices, shape[2])
	}
	return sink.Data
}

// dataRange returns max − min over the values of every slice given.
func dataRange(vals ...[]float32) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, vs := range vals {
		for _, v := range vs {
			lo, hi = min(lo, float64(v)), max(hi, float64(v))
		}
	}
	return hi - lo
}

// maxRelErr returns max|got − want| divided by the data range, the larger of the input's
// and the expected output's (a strong smoothing leaves an output range far smaller than
// the input's, and float32 rounding is relative to the data, not to the result's spread).
func maxRelErr(got, want, input []float32) float64 {
	rng := max(dataRange(want), dataRange(input))
	if rng == 0 {
		rng = 1
	}
	m := 0.0
	for i := range want {
		d := math.Abs(float64(got[i]) - float64(want[i]))
		if d != d {
			return math.Inf(1)
		}
		m = max(m, d)
	}
	return m / rng
}

// TestFilterMatchesSciPy runs every fixture case through every form that can express
// its kernel, with one and two threads, and compares with SciPy's ndimage.
func TestFilterMatchesSciPy(t *testing.T) {
	m := loadManifest(t)
	if len(m.Cases) == 0 {
		t.Fatal("no fixture cases")
	}
	worst := map[string]float64{}
	for _, c := range m.Cases {
		vol := m.Volumes[c.Volume]
		data := readF32(t, filepath.Join(fixtureDir, vol.File))
		want := readF32(t, filepath.Join(fixtureDir, c.Expected))
		for _, v := range caseVariants(c.Kernel) {
			for _, threads := range []int{1, 2} {
				name := fmt.Sprintf("%s/%s/threads=%d", c.Name, v.name, threads)
				t.Run(name, func(t *testing.T) {
					opt := FilterOptions{Edge: scipyEdge(c.Mode), Fill: c.Cval, Threads: threads, Scale: v.scale}
					got := runFilter(t, vol.Shape, data, v.plans, v.combine, opt)
					if len(got) != len(want) {
						t.Fatalf("%d values, want %d", len(got), len(want))
					}
					// expected: c.Reference (scipy.ndimage, SciPy 1.10.1, Debian 12)
					e := maxRelErr(got, want, data)
					if e > 1e-5 {
						t.Errorf("max |ours − %s| = %.3g of the data range, want ≤ 1e-5", c.Reference, e)
					}
					fam := strings.SplitN(c.Name, "/", 2)[0]
					worst[fam] = max(worst[fam], e)
				})
			}
		}
	}
	for fam, e := range worst {
		t.Logf("%-12s worst error %.2g of the data range", fam, e)
	}
}
