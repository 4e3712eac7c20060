package volume

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/tripass/tripass/tensor"
)

// noSeek hides a source's SliceSeeker.
type noSeek struct{ Source }

func randomPlans(rng *rand.Rand) map[string][]*tensor.Plan {
	taps := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.Float64() - 0.3
		}
		return v
	}
	dense := func(i, j, k int) *tensor.Dense {
		d := tensor.New(i, j, k)
		for n := range d.Data {
			d.Data[n] = rng.Float64() - 0.5
		}
		return d
	}
	two := tensor.SeparablePlan(1, taps(5), taps(3), taps(7))
	second := tensor.SeparablePlan(0.5, taps(5), taps(3), taps(7))
	two.Branches = append(two.Branches, second.Branches...)
	two.Kernel.AddScaled(1, second.Kernel)
	return map[string][]*tensor.Plan{
		"separable":          {tensor.SeparablePlan(1, taps(3), taps(5), taps(7))},
		"two terms":          {two},
		"direct even depth":  {{Form: tensor.Direct, Kernel: dense(3, 2, 4)}},
		"deeper than volume": {tensor.SeparablePlan(1, taps(3), taps(1), taps(31))},
		"three plans":        {tensor.SeparablePlan(1, taps(3), taps(3), taps(3)), tensor.SeparablePlan(1, taps(1), taps(5), taps(9)), {Form: tensor.Direct, Kernel: dense(3, 3, 3)}},
	}
}

// The union of the shards of a run equals the whole run bit for bit, for every edge
// mode, plan shape and shard count, with seekable and non-seekable inputs.
func TestFilterRangeShardsEqualWholeRun(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 4))
	h := Header{NX: 9, NY: 7, NZ: 13, Type: Float32}
	data := make([]float32, h.Voxels())
	for i := range data {
		data[i] = float32(rng.NormFloat64())
	}
	for name, plans := range randomPlans(rng) {
		combine := CombineNone
		if len(plans) > 1 {
			combine = CombineMagnitude
		}
		for _, edge := range []Edge{EdgeSymmetric, EdgeReflect, EdgeReplicate, EdgePeriodic, EdgeConstant} {
			opt := FilterOptions{Edge: edge, Fill: 0.75, Threads: 2, TempDir: t.TempDir()}
			var whole MemSink
			if _, err := Filter(&whole, NewMemSource(h, data), Float32, plans, combine, opt); err != nil {
				t.Fatalf("%s %v: %v", name, edge, err)
			}
			for _, n := range []int{1, 2, 3, 7, 13} {
				for _, seek := range []bool{true, false} {
					var got []float32
					for i := 0; i < n; i++ {
						z0, z1 := i*h.NZ/n, (i+1)*h.NZ/n
						var src Source = NewMemSource(h, data)
						if !seek {
							src = noSeek{src}
						}
						var part MemSink
						o := opt
						o.Threads = 1 + i%2 // the thread count must not matter
						st, err := FilterRange(&part, src, Float32, plans, combine, o, z0, z1)
						if errors.Is(err, ErrPeriodicNeedsSeek) && !seek && edge == EdgePeriodic && n > 1 {
							got = nil
							break
						}
						if err != nil {
							t.Fatalf("%s %v shard %d/%d: %v", name, edge, i, n, err)
						}
						if st.Slices != z1-z0 || part.Slices != z1-z0 {
							t.Fatalf("%s %v shard %d/%d wrote %d slices, want %d", name, edge, i, n, part.Slices, z1-z0)
						}
						got = append(got, part.Data...)
					}
					if got == nil {
						continue
					}
					for k := range got {
						if math.Float32bits(got[k]) != math.Float32bits(whole.Data[k]) {
							t.Fatalf("%s %v, %d shards (seek %v): voxel %d = %v, whole run %v", name, edge, n, seek, k, got[k], whole.Data[k])
						}
					}
				}
			}
		}
	}
}

func TestHalo(t *testing.T) {
	// out(z) = Σ_j K(j)·f(z + c − j): for kz = 4, c = 2, it reads z−1 … z+2.
	p := &tensor.Plan{Form: tensor.Direct, Kernel: tensor.New(1, 1, 4)}
	if b, a := Halo([]*tensor.Plan{p}); b != 1 || a != 2 {
		t.Errorf("Halo = %d, %d; want 1, 2", b, a)
	}
}

func TestCopyRange(t *testing.T) {
	h := Header{NX: 3, NY: 2, NZ: 6, Type: Float32}
	data := make([]float32, h.Voxels())
	for i := range data {
		data[i] = float32(i)
	}
	for _, src := range []Source{NewMemSource(h, data), noSeek{NewMemSource(h, data)}} {
		var sink MemSink
		if _, err := CopyRange(&sink, src, Uint16, 2, 5, nil); err != nil {
			t.Fatal(err)
		}
		if sink.Slices != 3 || sink.Data[0] != 12 || sink.Data[len(sink.Data)-1] != 29 {
			t.Errorf("copied %d slices, first %v last %v; want 3, 12, 29", sink.Slices, sink.Data[0], sink.Data[len(sink.Data)-1])
		}
	}
}
