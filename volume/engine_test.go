package volume

import (
	"errors"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"runtime"
	"slices"
	"strings"
	"sync/atomic"
	"testing"
	"time"

	"github.com/tripass/tripass/tensor"
)

var allEdges = []Edge{EdgeSymmetric, EdgeReflect, EdgeReplicate, EdgePeriodic, EdgeConstant}

func TestParseEdge(t *testing.T) {
	for _, e := range allEdges {
		got, err := ParseEdge(strings.ToUpper(e.String()))
		if err != nil || got != e {
			t.Errorf("ParseEdge(%q) = %v, %v", e.String(), got, err)
		}
	}
	if _, err := ParseEdge("mirror"); err == nil {
		t.Error("ParseEdge accepted SciPy's name mirror")
	}
	if Edge(0) != EdgeSymmetric {
		t.Error("the zero Edge is not the symmetric extension")
	}
}

// TestEdgeIndex checks the extensions of a b c d against SciPy's documentation of its
// modes (scipy.ndimage, "Filter functions" tutorial: the extension of [a b c d] under
// reflect, mirror, nearest, wrap), which tripass calls symmetric, reflect, replicate and
// periodic; the multiple folds beyond the first period follow from the periods 2n, 2n−2
// and n and were checked against scipy.ndimage.correlate1d (SciPy 1.10.1) for a kernel
// of 15 taps on 4 samples.
func TestEdgeIndex(t *testing.T) {
	const abcd = "abcd"
	ext := func(e Edge, from, to int) string {
		var b strings.Builder
		for i := from; i < to; i++ {
			j, ok := e.Index(i, 4)
			if !ok {
				b.WriteByte('f')
			} else {
				b.WriteByte(abcd[j])
			}
		}
		return b.String()
	}
	// One period of each extension, starting at index 0.
	period := map[Edge]string{
		EdgeSymmetric: "abcddcba",
		EdgeReflect:   "abcdcb",
		EdgeReplicate: "",
		EdgePeriodic:  "abcd",
	}
	for _, e := range allEdges {
		var want strings.Builder
		for i := -14; i < 15; i++ {
			switch {
			case i >= 0 && i < 4:
				want.WriteByte(abcd[i])
			case e == EdgeConstant:
				want.WriteByte('f')
			case e == EdgeReplicate && i < 0:
				want.WriteByte('a')
			case e == EdgeReplicate:
				want.WriteByte('d')
			default:
				p := period[e]
				want.WriteByte(p[((i%len(p))+len(p))%len(p)])
			}
		}
		if got := ext(e, -14, 15); got != want.String() {
			t.Errorf("%v: %s, want %s", e, got, want.String())
		}
	}
	// A single sample: every extension but constant repeats it.
	for _, e := range allEdges[:4] {
		for i := -5; i < 6; i++ {
			if j, ok := e.Index(i, 1); j != 0 || !ok {
				t.Errorf("%v.Index(%d, 1) = %d, %v", e, i, j, ok)
			}
		}
	}
}

// randomKernelPlans returns a random kernel of the given size as plans of every form
// that can hold it exactly: direct, CP (a sum of rank-one terms) and Tucker in both
// orders, all standing for the same kernel.
func randomKernelPlans(rng *rand.Rand, kx, ky, kz int) (k *tensor.Dense, plans map[string]*tensor.Plan) {
	vec := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = rng.NormFloat64()
			if rng.IntN(6) == 0 {
				v[i] = 0 // zero taps, at the ends too, get trimmed or skipped
			}
		}
		return v
	}
	r := [3]int{1 + rng.IntN(2), 1 + rng.IntN(2), 1 + rng.IntN(2)}
	ux, uy, uz := make([][]float64, r[0]), make([][]float64, r[1]), make([][]float64, r[2])
	for i := range ux {
		ux[i] = vec(kx)
	}
	for i := range uy {
		uy[i] = vec(ky)
	}
	for i := range uz {
		uz[i] = vec(kz)
	}
	core := make([]float64, r[0]*r[1]*r[2])
	for i := range core {
		core[i] = rng.NormFloat64()
	}
	fk := fixtureKernel{CoreShape: r, Core: core, UX: ux, UY: uy, UZ: uz}
	xyz, yxz := tuckerPlans(fk)
	k = xyz.Kernel
	// The same kernel as CP terms: one term per core element.
	var terms []fixtureCP
	for c := 0; c < r[2]; c++ {
		for b := 0; b < r[1]; b++ {
			for a := 0; a < r[0]; a++ {
				z := make([]float64, kz)
				for i := range z {
					z[i] = core[a+r[0]*(b+r[1]*c)] * uz[c][i]
				}
				terms = append(terms, fixtureCP{X: ux[a], Y: uy[b], Z: z})
			}
		}
	}
	return k, map[string]*tensor.Plan{
		"direct":     densePlan(k),
		"cp":         cpPlan(terms),
		"tucker-xyz": xyz,
		"tucker-yxz": yxz,
	}
}

func randomVolume(rng *rand.Rand, n int) []float32 {
	v := make([]float32, n)
	for i := range v {
		v[i] = rng.Float32()
	}
	return v
}

// nonSeeking hides a source's SliceSeeker.
type nonSeeking struct{ Source }

// TestFilterRandomAgainstDefinition draws random volumes (deeper than the kernels, so
// the z rings wrap and periodic edges use their caches) and random kernels in every
// form, and compares with the definition of the 3D convolution computed voxel by voxel
// in float64 (naiveConvolve). Threads 1, 2 and 3 must agree bit for bit.
func TestFilterRandomAgainstDefinition(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 11))
	for it := range 24 {
		shape := [3]int{1 + rng.IntN(9), 1 + rng.IntN(9), 5 + rng.IntN(30)}
		kx, ky, kz := 1+rng.IntN(6), 1+rng.IntN(6), 1+rng.IntN(8)
		edge := allEdges[it%len(allEdges)]
		fill := 0.0
		if it%2 == 1 {
			fill = 1.75
		}
		data := randomVolume(rng, shape[0]*shape[1]*shape[2])
		k, plans := randomKernelPlans(rng, kx, ky, kz)
		want := naiveConvolve(data, shape, k, edge, fill)
		names := slices.Sorted(func(yield func(string) bool) {
			for n := range plans {
				if !yield(n) {
					return
				}
			}
		})
		for _, name := range names {
			p := plans[name]
			t.Run(fmt.Sprintf("%d/%v/%dx%dx%d/k%dx%dx%d/%s", it, edge, shape[0], shape[1], shape[2], kx, ky, kz, name), func(t *testing.T) {
				var outs [][]float32
				for _, threads := range []int{1, 2, 3} {
					opt := FilterOptions{Edge: edge, Fill: fill, Threads: threads}
					outs = append(outs, runFilter(t, shape, data, []*tensor.Plan{p}, CombineNone, opt))
				}
				if e := maxRelErr64(outs[0], want); e > 1e-5 {
					t.Errorf("max error %.3g of the data range, want ≤ 1e-5", e)
				}
				for i := 1; i < len(outs); i++ {
					if !slices.Equal(f32bits(outs[0]), f32bits(outs[i])) {
						t.Errorf("output with %d threads differs from 1 thread", i+1)
					}
				}
				if edge == EdgePeriodic {
					// A source that cannot seek goes through a temporary copy.
					h := Header{NX: shape[0], NY: shape[1], NZ: shape[2], Type: Float32}
					var sink MemSink
					st, err := Filter(&sink, nonSeeking{NewMemSource(h, data)}, Float32, []*tensor.Plan{p}, CombineNone, FilterOptions{Edge: edge, TempDir: t.TempDir()})
					if err != nil {
						t.Fatal(err)
					}
					if !slices.Equal(f32bits(sink.Data), f32bits(outs[0])) {
						t.Error("non-seekable source gives another output")
					}
					t.Logf("spilled %d bytes", st.SpillBytes)
				}
			})
		}
	}
}

func f32bits(v []float32) []uint32 {
	b := make([]uint32, len(v))
	for i, x := range v {
		b[i] = math.Float32bits(x)
	}
	return b
}

// TestFilterThreadsBitIdentical: the output must not depend on the number of threads
// (sharded runs will rely on it), for a slice large enough to be cut into many blocks.
func TestFilterThreadsBitIdentical(t *testing.T) {
	// Filter uses at most GOMAXPROCS workers; allow 7 whatever the machine.
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(8))
	rng := rand.New(rand.NewPCG(3, 5))
	shape := [3]int{150, 97, 12}
	data := randomVolume(rng, shape[0]*shape[1]*shape[2])
	_, plans := randomKernelPlans(rng, 5, 4, 3)
	for _, edge := range allEdges {
		for name, p := range plans {
			var ref []uint32
			for _, threads := range []int{1, 2, 4, 7} {
				got := f32bits(runFilter(t, shape, data, []*tensor.Plan{p}, CombineNone, FilterOptions{Edge: edge, Fill: 0.5, Threads: threads}))
				if ref == nil {
					ref = got
				} else if !slices.Equal(ref, got) {
					t.Errorf("%v %s: %d threads differ from 1", edge, name, threads)
				}
			}
		}
	}
}

// TestFilterCombine checks CombineSum and CombineMagnitude with scales against the
// single-plan outputs combined by hand.
func TestFilterCombine(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 9))
	shape := [3]int{10, 8, 9}
	data := randomVolume(rng, shape[0]*shape[1]*shape[2])
	ps := sobelPlans()
	sc := []float64{0.5, -2, 3}
	var single [][]float32
	for _, p := range ps {
		single = append(single, runFilter(t, shape, data, []*tensor.Plan{p}, CombineNone, FilterOptions{}))
	}
	sum := runFilter(t, shape, data, ps, CombineSum, FilterOptions{Scale: sc})
	mag := runFilter(t, shape, data, ps, CombineMagnitude, FilterOptions{Scale: sc})
	for i := range sum {
		var s, m float64
		for p := range ps {
			v := sc[p] * float64(single[p][i])
			s += v
			m += v * v
		}
		if math.Abs(float64(sum[i])-s) > 1e-5*(1+math.Abs(s)) {
			t.Fatalf("sum at %d: %g, want %g", i, sum[i], s)
		}
		if math.Abs(float64(mag[i])-math.Sqrt(m)) > 1e-5*(1+math.Sqrt(m)) {
			t.Fatalf("magnitude at %d: %g, want %g", i, mag[i], math.Sqrt(m))
		}
	}
}

// TestFilterIdentityAndTypes: an identity kernel copies the input; integer outputs are
// rounded and clamped and the clamps counted.
func TestFilterIdentityAndTypes(t *testing.T) {
	h := Header{NX: 5, NY: 4, NZ: 3, Type: Float32}
	data := make([]float32, 60)
	for i := range data {
		data[i] = float32(i)*10 - 100.4 // −100.4 … 489.6
	}
	id := tensor.SeparablePlan(1, []float64{1}, []float64{1}, []float64{1})
	var sink MemSink
	st, err := Filter(&sink, NewMemSource(h, data), Uint8, []*tensor.Plan{id}, CombineNone, FilterOptions{})
	if err != nil {
		t.Fatal(err)
	}
	clamped := 0
	for i, v := range data {
		want := math.Max(0, math.Min(255, math.Round(float64(v))))
		if r := math.Round(float64(v)); r < 0 || r > 255 { // counted when the rounded value is beyond the range
			clamped++
		}
		if float64(sink.Data[i]) != want {
			t.Fatalf("voxel %d: %g, want %g", i, sink.Data[i], want)
		}
	}
	if st.Clamped != int64(clamped) || sink.Type != Uint8 {
		t.Errorf("clamped %d (type %v), want %d", st.Clamped, sink.Type, clamped)
	}
	// An identity padded with zero taps is trimmed to the identity and copies exactly.
	pad := tensor.SeparablePlan(1, []float64{0, 1, 0}, []float64{0, 0, 1, 0, 0}, []float64{0, 1, 0})
	got := runFilter(t, [3]int{5, 4, 3}, data, []*tensor.Plan{pad}, CombineNone, FilterOptions{})
	if !slices.Equal(got, data) {
		t.Error("identity plan with zero taps changed the data")
	}
}

// TestFilterNaN: NaN and Inf inputs are counted and spread over the kernel's support.
func TestFilterNaN(t *testing.T) {
	shape := [3]int{7, 6, 9}
	data := make([]float32, shape[0]*shape[1]*shape[2])
	for i := range data {
		data[i] = 1
	}
	at := func(x, y, z int) int { return x + shape[0]*(y+shape[1]*z) }
	data[at(3, 3, 4)] = float32(math.NaN())
	data[at(0, 0, 0)] = float32(math.Inf(1))
	data[at(6, 5, 8)] = float32(math.Inf(-1))
	h := Header{NX: shape[0], NY: shape[1], NZ: shape[2], Type: Float32}
	box := []float64{1, 1, 1}
	for _, p := range []*tensor.Plan{tensor.SeparablePlan(1.0/27, box, box, box), densePlan(tensor.Outer(1.0/27, box, box, box))} {
		var sink MemSink
		st, err := Filter(&sink, NewMemSource(h, data), Float32, []*tensor.Plan{p}, CombineNone, FilterOptions{Edge: EdgeReplicate})
		if err != nil {
			t.Fatal(err)
		}
		if st.NaN != 1 || st.Inf != 2 {
			t.Errorf("counted %d NaN and %d Inf, want 1 and 2", st.NaN, st.Inf)
		}
		if v := sink.Data[at(2, 4, 5)]; v == v {
			t.Errorf("neighbour of the NaN is %g, want NaN", v)
		}
		if v := sink.Data[at(3, 3, 0)]; math.Abs(float64(v)-1) > 1e-6 {
			t.Errorf("voxel far from NaN and Inf is %g, want 1", v)
		}
	}
}

type failingSource struct {
	Source
	after int
	n     int
}

func (f *failingSource) ReadSlice(dst *Slice) error {
	if f.n == f.after {
		return errors.New("disk on fire")
	}
	f.n++
	return f.Source.ReadSlice(dst)
}

type failingSink struct {
	MemSink
	after int
}

func (f *failingSink) WriteSlice(src *Slice) error {
	if f.Slices == f.after {
		return errors.New("disk full")
	}
	return f.MemSink.WriteSlice(src)
}

func TestFilterErrors(t *testing.T) {
	h := Header{NX: 6, NY: 5, NZ: 10, Type: Uint16}
	data := make([]float32, h.Voxels())
	g := tensor.SeparablePlan(1, []float64{1, 2, 1}, []float64{1, 2, 1}, []float64{1, 2, 1})
	plans := []*tensor.Plan{g}
	cases := []struct {
		name string
		run  func() error
		want string
	}{
		{"read error", func() error {
			_, err := Filter(&MemSink{}, &failingSource{Source: NewMemSource(h, data), after: 4}, Float32, plans, CombineNone, FilterOptions{})
			return err
		}, "reading slice 4: disk on fire"},
		{"short source", func() error {
			short := NewMemSource(Header{NX: 6, NY: 5, NZ: 3, Type: Uint16}, data[:90])
			_, err := Filter(&MemSink{}, headerLie{short, h}, Float32, plans, CombineNone, FilterOptions{})
			return err
		}, "reading slice 3: unexpected EOF"},
		{"write error", func() error {
			_, err := Filter(&failingSink{after: 6}, NewMemSource(h, data), Float32, plans, CombineNone, FilterOptions{Threads: 2})
			return err
		}, "writing slice 6: disk full"},
		{"two plans, no combine", func() error {
			_, err := Filter(&MemSink{}, NewMemSource(h, data), Float32, []*tensor.Plan{g, g}, CombineNone, FilterOptions{})
			return err
		}, "exactly one plan"},
		{"scale count", func() error {
			_, err := Filter(&MemSink{}, NewMemSource(h, data), Float32, plans, CombineNone, FilterOptions{Scale: []float64{1, 2}})
			return err
		}, "2 scale factors for 1 plans"},
		{"bad taps", func() error {
			p := tensor.SeparablePlan(1, []float64{1, 2, 1}, []float64{1}, []float64{1})
			p.Branches[0].First = []float64{1, 1}
			_, err := Filter(&MemSink{}, NewMemSource(h, data), Float32, []*tensor.Plan{p}, CombineNone, FilterOptions{})
			return err
		}, "first pass has 2 taps"},
		{"fill NaN", func() error {
			_, err := Filter(&MemSink{}, NewMemSource(h, data), Float32, plans, CombineNone, FilterOptions{Edge: EdgeConstant, Fill: math.NaN()})
			return err
		}, "not finite"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			before := runtime.NumGoroutine()
			err := c.run()
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Fatalf("error %v, want one containing %q", err, c.want)
			}
			// Every goroutine of the engine has ended.
			deadline := time.Now().Add(2 * time.Second)
			for runtime.NumGoroutine() > before && time.Now().Before(deadline) {
				time.Sleep(5 * time.Millisecond)
			}
			if n := runtime.NumGoroutine(); n > before {
				t.Errorf("%d goroutines left running", n-before)
			}
		})
	}
}

// headerLie reports another header than its source's.
type headerLie struct {
	Source
	h Header
}

func (l headerLie) Header() Header { return l.h }

func TestFilterProgress(t *testing.T) {
	h := Header{NX: 4, NY: 3, NZ: 6, Type: Float32}
	var calls atomic.Int32
	last := 0
	g := tensor.SeparablePlan(1, []float64{1, 2, 1}, []float64{1}, []float64{1, 1})
	_, err := Filter(&MemSink{}, NewMemSource(h, make([]float32, 72)), Float32, []*tensor.Plan{g}, CombineNone, FilterOptions{
		Progress: func(done, total int) {
			calls.Add(1)
			if done != last+1 || total != 6 {
				t.Errorf("progress %d/%d after %d", done, total, last)
			}
			last = done
		},
	})
	if err != nil || calls.Load() != 6 {
		t.Fatalf("%v, %d progress calls", err, calls.Load())
	}
}

// TestSinkAndSources checks the in-memory sources round-trip through the sink.
func TestSinkAndSources(t *testing.T) {
	h := Header{NX: 3, NY: 2, NZ: 4, Type: Int16}
	data := []float32{}
	for i := range 24 {
		data = append(data, float32(i*1000-9000))
	}
	var sink MemSink
	if _, err := Copy(&sink, NewMemSource(h, data), Int16, nil); err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(sink.Data, data) {
		t.Errorf("MemSource → MemSink: %v", sink.Data)
	}
	gen := NewGenSource(h, func(z int, dst []float32) { copy(dst, data[z*6:]) })
	if err := gen.SeekSlice(2); err != nil {
		t.Fatal(err)
	}
	s := NewSlice(3, 2, Int16)
	if err := gen.ReadSlice(s); err != nil || s.At(0) != float64(data[12]) {
		t.Errorf("GenSource after seek: %v %v", s.At(0), err)
	}
	gen.ReadSlice(s)
	if err := gen.ReadSlice(s); err != io.EOF {
		t.Errorf("GenSource past the end: %v", err)
	}
}

// TestFilterMixedPlans sums plans of every form and order (direct, CP, Tucker XYZ and
// YXZ, of different sizes) from an int16 input and compares with the definition
// applied to each kernel and summed.
func TestFilterMixedPlans(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	shape := [3]int{13, 11, 17}
	h := Header{NX: shape[0], NY: shape[1], NZ: shape[2], Type: Int16}
	data := make([]float32, h.Voxels())
	for i := range data {
		data[i] = float32(rng.IntN(2000) - 1000)
	}
	k1, p1 := randomKernelPlans(rng, 3, 5, 7)
	k2, p2 := randomKernelPlans(rng, 4, 2, 3)
	k3, p3 := randomKernelPlans(rng, 1, 6, 1)
	plans := []*tensor.Plan{p1["tucker-yxz"], p2["direct"], p3["tucker-xyz"], p1["cp"]}
	kernels := []*tensor.Dense{k1, k2, k3, k1}
	scale := []float64{1, -0.5, 2, 0.25}
	for _, edge := range allEdges {
		want := make([]float64, len(data))
		for i, k := range kernels {
			for j, v := range naiveConvolve(data, shape, k, edge, 3) {
				want[j] += scale[i] * v
			}
		}
		var sink MemSink
		if _, err := Filter(&sink, NewMemSource(h, data), Float32, plans, CombineSum, FilterOptions{Edge: edge, Fill: 3, Scale: scale}); err != nil {
			t.Fatal(err)
		}
		if e := maxRelErr64(sink.Data, want); e > 1e-5 {
			t.Errorf("%v: max error %.3g of the data range", edge, e)
		}
	}
}

// TestScheduleShortcut: schedule visits only the groups near the ends of the stack; the
// ring depth must equal the one found by visiting every group.
func TestScheduleShortcut(t *testing.T) {
	full := func(e *engine) int {
		nz := e.nz
		cached := func(j int) bool { return j < e.nHead || j >= nz-e.nTail }
		ring, hi := 1, -1
		for z0 := 0; z0 < nz; z0 += e.group {
			lo, top := math.MaxInt, -1
			for r := z0 - e.zBefore; r <= min(z0+e.group, nz)-1+e.zAfter; r++ {
				if j, ok := e.edge.Index(r, nz); ok && !cached(j) {
					lo, top = min(lo, j), max(top, j)
				}
			}
			hi = max(hi, top)
			if lo <= top {
				ring = max(ring, hi-lo+1)
			}
		}
		return ring
	}
	for _, edge := range allEdges {
		for nz := 1; nz < 90; nz += 7 {
			for zb := 0; zb < 9; zb += 2 {
				for za := 0; za < 9; za += 3 {
					e := &engine{nz: nz, edge: edge, zBefore: zb, zAfter: za,
						plans: []*compiled{{}}}
					e.schedule()
					if e.holdAll {
						continue
					}
					if want := full(e); e.ring != want {
						t.Errorf("%v nz=%d z extents %d,%d: ring %d, want %d", edge, nz, zb, za, e.ring, want)
					}
				}
			}
		}
	}
	// A header claiming 2^40 slices of one voxel is scheduled at once.
	e := &engine{nz: 1 << 40, edge: EdgeReflect, zBefore: 30, zAfter: 30, plans: []*compiled{{}}}
	e.schedule()
	if e.ring < 61 || e.ring > 70 {
		t.Errorf("ring %d for 61 taps", e.ring)
	}
}

// TestFilterZeroKernel: a kernel of zeros gives zeros (whatever the fill), in every
// form, alone or beside another plan.
func TestFilterZeroKernel(t *testing.T) {
	shape := [3]int{5, 4, 6}
	data := randomVolume(rand.New(rand.NewPCG(1, 1)), 120)
	z3 := []float64{0, 0, 0}
	zero := []*tensor.Plan{
		tensor.SeparablePlan(1, z3, []float64{1, 2, 1}, z3),
		densePlan(tensor.New(3, 2, 4)),
	}
	for _, p := range zero {
		for _, edge := range allEdges {
			got := runFilter(t, shape, data, []*tensor.Plan{p}, CombineNone, FilterOptions{Edge: edge, Fill: 5})
			for i, v := range got {
				if v != 0 {
					t.Fatalf("%v %v: voxel %d = %g, want 0", p.Form, edge, i, v)
				}
			}
		}
	}
	// Beside an identity, the sum is the input.
	id := tensor.SeparablePlan(1, []float64{1}, []float64{1}, []float64{1})
	got := runFilter(t, shape, data, []*tensor.Plan{zero[0], id, zero[1]}, CombineSum, FilterOptions{})
	if !slices.Equal(got, data) {
		t.Error("zero plans plus identity changed the data")
	}
}
