package volume

import (
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/tripass/tripass/tensor"
)

// gaussTaps is the sampled Gaussian with SciPy's documented radius int(4σ + 0.5),
// normalised to sum 1 (common practice; the engine's tests take their taps from SciPy's
// fixtures instead).
func gaussTaps(sigma float64) []float64 {
	r := int(4*sigma + 0.5)
	g := make([]float64, 2*r+1)
	s := 0.0
	for i := range g {
		x := float64(i - r)
		g[i] = math.Exp(-0.5 * x * x / (sigma * sigma))
		s += g[i]
	}
	for i := range g {
		g[i] /= s
	}
	return g
}

// benchFilter filters an in-memory float32 cube of side n and reports voxels/s. The
// source holds the whole cube (for the benchmark only); the sink discards.
func benchFilter(b *testing.B, n int, plans []*tensor.Plan, combine Combine, opt FilterOptions) {
	benchFilterType(b, n, Float32, plans, combine, opt)
}

// benchFilterType is benchFilter with input and output of sample type t.
func benchFilterType(b *testing.B, n int, t SampleType, plans []*tensor.Plan, combine Combine, opt FilterOptions) {
	h := Header{NX: n, NY: n, NZ: n, Type: t}
	data := make([]float32, h.Voxels())
	rng := rand.New(rand.NewPCG(1, 2))
	for i := range data {
		data[i] = rng.Float32() * 4000
	}
	b.SetBytes(h.Bytes())
	b.ReportAllocs()
	b.ResetTimer()
	for b.Loop() {
		src := NewMemSource(h, data)
		if _, err := Filter(&MemSink{Discard: true}, src, t, plans, combine, opt); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(h.Voxels())*float64(b.N)/b.Elapsed().Seconds(), "voxels/s")
}

// BenchmarkFilterGaussian: σ = 2 (17 taps per axis), symmetric edges.
func BenchmarkFilterGaussian(b *testing.B) {
	g := gaussTaps(2)
	p := tensor.SeparablePlan(1, g, g, g)
	for _, n := range []int{128, 256, 512} {
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			benchFilter(b, n, []*tensor.Plan{p}, CombineNone, FilterOptions{})
		})
	}
}

// BenchmarkFilterGaussianUint16: the same on uint16 input written back as uint16 (what
// smoothing does to a typical CT or microscopy stack).
func BenchmarkFilterGaussianUint16(b *testing.B) {
	g := gaussTaps(2)
	p := tensor.SeparablePlan(1, g, g, g)
	b.Run("256", func(b *testing.B) {
		benchFilterType(b, 256, Uint16, []*tensor.Plan{p}, CombineNone, FilterOptions{})
	})
}

// BenchmarkFilterSobelMagnitude: three Sobel plans combined into the gradient magnitude.
func BenchmarkFilterSobelMagnitude(b *testing.B) {
	b.Run("256", func(b *testing.B) {
		benchFilter(b, 256, sobelPlans(), CombineMagnitude, FilterOptions{Scale: []float64{1.0 / 32, 1.0 / 32, 1.0 / 32}})
	})
}

// BenchmarkFilterTucker: a 15³ Tucker plan of ranks (9, 1, 9) with order YXZ (the shape
// the planner gives a tilted anisotropic Gaussian), random factors.
func BenchmarkFilterTucker(b *testing.B) {
	rng := rand.New(rand.NewPCG(4, 4))
	vec := func() []float64 {
		v := make([]float64, 15)
		for i := range v {
			v[i] = rng.NormFloat64()
		}
		return v
	}
	p := &tensor.Plan{Form: tensor.Tucker, Order: tensor.YXZ, Ranks: [3]int{9, 1, 9}}
	br := tensor.Branch{First: vec()} // the y factor: rank 1
	for range 9 {
		br.Leaves = append(br.Leaves, tensor.Leaf{Second: vec(), Z: vec()})
	}
	p.Branches = []tensor.Branch{br}
	p.Kernel = tensor.New(15, 15, 15)
	p.Kernel = p.Reconstruct()
	b.Run("128", func(b *testing.B) {
		benchFilter(b, 128, []*tensor.Plan{p}, CombineNone, FilterOptions{})
	})
}

// BenchmarkFilterDirect: a dense random 9³ kernel applied tap by tap.
func BenchmarkFilterDirect(b *testing.B) {
	rng := rand.New(rand.NewPCG(5, 5))
	k := tensor.New(9, 9, 9)
	for i := range k.Data {
		k.Data[i] = rng.NormFloat64()
	}
	b.Run("128", func(b *testing.B) {
		benchFilter(b, 128, []*tensor.Plan{densePlan(k)}, CombineNone, FilterOptions{})
	})
}
