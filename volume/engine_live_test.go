package volume

import (
	"encoding/binary"
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"github.com/tripass/tripass/tensor"
)

type liveCase struct {
	Name   string    `json:"name"`
	Kind   string    `json:"kind"`
	Input  string    `json:"input"`
	Shape  [3]int    `json:"shape"`
	Mode   string    `json:"mode"`
	Cval   float64   `json:"cval"`
	KShape [3]int    `json:"kshape,omitempty"`
	Kernel []float64 `json:"kernel,omitempty"`
	Sigma  []float64 `json:"sigma,omitempty"`

	plans   map[string][]*tensor.Plan
	combine Combine
	scale   []float64
	data    []float32
}

// TestLiveCrossCheckSciPy draws random cases (volume sizes, kernels, edge modes, fill
// values), has scripts/crosscheck_engine.py compute them with Debian's scipy.ndimage
// (convolve, gaussian_filter, sobel) and compares every form of plan that holds the
// kernel. It runs when TRIPASS_LIVE_SCIPY=1 or TRIPASS_LIVE=1; TRIPASS_LIVE_SEED fixes
// the draw (the seed is logged).
func TestLiveCrossCheckSciPy(t *testing.T) {
	if os.Getenv("TRIPASS_LIVE_SCIPY") != "1" && os.Getenv("TRIPASS_LIVE") != "1" {
		t.Skip("live cross-check with SciPy: set TRIPASS_LIVE_SCIPY=1")
	}
	const python = "/usr/bin/python3"
	if _, err := os.Stat(python); err != nil {
		t.Skip("live cross-check: no " + python)
	}
	seed := uint64(time.Now().UnixNano())
	if s := os.Getenv("TRIPASS_LIVE_SEED"); s != "" {
		v, err := strconv.ParseUint(s, 10, 64)
		if err != nil {
			t.Fatalf("TRIPASS_LIVE_SEED=%q: %v", s, err)
		}
		seed = v
	}
	t.Logf("seed %d (set TRIPASS_LIVE_SEED to repeat)", seed)
	rng := rand.New(rand.NewPCG(seed, 99))
	dir := t.TempDir()
	modes := []string{"reflect", "mirror", "nearest", "wrap", "constant"}
	var cases []*liveCase
	for i := range 30 {
		c := &liveCase{
			Name:  fmt.Sprintf("case%02d", i),
			Shape: [3]int{1 + rng.IntN(20), 1 + rng.IntN(20), 1 + rng.IntN(40)},
			Mode:  modes[rng.IntN(len(modes))],
		}
		if c.Mode == "constant" && rng.IntN(2) == 0 {
			c.Cval = math.Round(rng.NormFloat64()*100) / 10
		}
		c.Input = c.Name + ".f32"
		c.data = randomVolume(rng, c.Shape[0]*c.Shape[1]*c.Shape[2])
		c.combine = CombineNone
		switch i % 3 {
		case 0:
			c.Kind = "dense"
			k, plans := randomKernelPlans(rng, 1+rng.IntN(9), 1+rng.IntN(9), 1+rng.IntN(9))
			c.KShape, c.Kernel = k.Dims(), k.Data
			c.plans = map[string][]*tensor.Plan{}
			for name, p := range plans {
				c.plans[name] = []*tensor.Plan{p}
			}
		case 1:
			c.Kind = "gaussian"
			c.Sigma = []float64{0.3 + 3*rng.Float64(), 0.3 + 3*rng.Float64(), 0.3 + 3*rng.Float64()}
			p := tensor.SeparablePlan(1, gaussTaps(c.Sigma[0]), gaussTaps(c.Sigma[1]), gaussTaps(c.Sigma[2]))
			c.plans = map[string][]*tensor.Plan{"separable": {p}}
		case 2:
			c.Kind = "sobel"
			c.combine = CombineMagnitude
			c.scale = []float64{1.0 / 32, 1.0 / 32, 1.0 / 32}
			c.plans = map[string][]*tensor.Plan{"separable": sobelPlans()}
		}
		b := make([]byte, 4*len(c.data))
		for j, v := range c.data {
			binary.LittleEndian.PutUint32(b[4*j:], math.Float32bits(v))
		}
		if err := os.WriteFile(filepath.Join(dir, c.Input), b, 0o644); err != nil {
			t.Fatal(err)
		}
		cases = append(cases, c)
	}
	js, err := json.Marshal(cases)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, "cases.json"), js, 0o644); err != nil {
		t.Fatal(err)
	}
	cmd := exec.Command(python, filepath.Join("..", "scripts", "crosscheck_engine.py"), dir)
	out, err := cmd.CombinedOutput()
	if ee, ok := err.(*exec.ExitError); ok && ee.ExitCode() == 3 {
		t.Skipf("live cross-check: %s", out)
	}
	if err != nil {
		t.Fatalf("crosscheck_engine.py: %v\n%s", err, out)
	}
	var refs map[string]string
	rb, err := os.ReadFile(filepath.Join(dir, "references.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(rb, &refs); err != nil {
		t.Fatal(err)
	}
	for _, c := range cases {
		want := readF32(t, filepath.Join(dir, c.Name+".expected.f32"))
		for name, plans := range c.plans {
			t.Run(fmt.Sprintf("%s/%s/%dx%dx%d/%s/%g/%s", c.Name, c.Kind, c.Shape[0], c.Shape[1], c.Shape[2], c.Mode, c.Cval, name), func(t *testing.T) {
				opt := FilterOptions{Edge: scipyEdge(c.Mode), Fill: c.Cval, Scale: c.scale}
				got := runFilter(t, c.Shape, c.data, plans, c.combine, opt)
				// expected: refs[c.Name] (scipy.ndimage from Debian's python3-scipy)
				if e := maxRelErr(got, want, c.data); e > 1e-5 {
					t.Errorf("max |ours − %s| = %.3g of the data range, want ≤ 1e-5", refs[c.Name], e)
				}
			})
		}
	}
}
