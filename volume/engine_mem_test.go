package volume

import (
	"errors"
	"runtime"
	"sync"
	"sync/atomic"
	"testing"
	"time"

	"github.com/tripass/tripass/tensor"
)

// rockSlice synthesises slice z of a porous rock core phantom: a disc of grains with
// pores, varying slowly with z. Deterministic and cheap.
func rockSlice(nx, ny int) func(z int, dst []float32) {
	return func(z int, dst []float32) {
		cx, cy := float32(nx)/2, float32(ny)/2
		r2 := cx * cx * 0.8
		for y := 0; y < ny; y++ {
			for x := 0; x < nx; x++ {
				dx, dy := float32(x)-cx, float32(y)-cy
				v := float32(0)
				if dx*dx+dy*dy < r2 {
					v = 1000 + float32((x*7+y*13+z*5)%97)
				}
				dst[x+nx*y] = v
			}
		}
	}
}

// peakHeap runs f while a goroutine samples runtime.MemStats.HeapInuse, and returns the
// largest value seen and the bytes allocated during f.
func peakHeap(f func()) (peak, allocated uint64) {
	runtime.GC()
	var before runtime.MemStats
	runtime.ReadMemStats(&before)
	var stop atomic.Bool
	var wg sync.WaitGroup
	var mx uint64
	wg.Add(1)
	go func() {
		defer wg.Done()
		var ms runtime.MemStats
		for !stop.Load() {
			runtime.ReadMemStats(&ms)
			mx = max(mx, ms.HeapInuse)
			time.Sleep(5 * time.Millisecond)
		}
	}()
	f()
	stop.Store(true)
	wg.Wait()
	var after runtime.MemStats
	runtime.ReadMemStats(&after)
	mx = max(mx, after.HeapInuse)
	return mx, after.TotalAlloc - before.TotalAlloc
}

// TestFilterMemoryIndependentOfDepth filters generated stacks of the same 160×128
// slices, 32 and 1024 slices deep, with a Gaussian-like separable plan, a Tucker plan and
// a direct one, and requires the same peak heap within 10% and the same allocations
// within 10% (the engine allocates its buffers once; nothing grows with the depth).
func TestFilterMemoryIndependentOfDepth(t *testing.T) {
	if testing.Short() {
		t.Skip("memory test filters 1024 slices")
	}
	g := []float64{1, 4, 6, 4, 1}
	sep := tensor.SeparablePlan(1.0/4096, g, g, g)
	_, tucker := tuckerPlans(fixtureKernel{CoreShape: [3]int{2, 2, 1}, Core: []float64{1, 0.5, -0.25, 2},
		UX: [][]float64{{1, 2, 1}, {1, 0, -1}}, UY: [][]float64{{1, 1, 1}, {-1, 2, -1}}, UZ: [][]float64{{1, 2, 3, 2, 1}}})
	direct := densePlan(tensor.Outer(1.0/27, []float64{1, 1, 1}, []float64{1, 1, 1}, []float64{1, 1, 1}))
	for _, c := range []struct {
		name string
		plan *tensor.Plan
		edge Edge
	}{
		{"separable", sep, EdgeSymmetric},
		{"tucker-periodic", tucker, EdgePeriodic},
		{"direct", direct, EdgeReflect},
	} {
		t.Run(c.name, func(t *testing.T) {
			run := func(nz int) (peak, alloc uint64, st FilterStats) {
				h := Header{NX: 160, NY: 128, NZ: nz, Type: Uint16}
				src := NewGenSource(h, rockSlice(160, 128))
				sink := &MemSink{Discard: true}
				peak, alloc = peakHeap(func() {
					var err error
					st, err = Filter(sink, src, Uint16, []*tensor.Plan{c.plan}, CombineNone, FilterOptions{Edge: c.edge, Threads: 2})
					if err != nil {
						t.Error(err)
					}
				})
				if sink.Slices != nz {
					t.Errorf("%d slices written, want %d", sink.Slices, nz)
				}
				return peak, alloc, st
			}
			p32, a32, st32 := run(32)
			p1024, a1024, st1024 := run(1024)
			t.Logf("nz=32: peak heap %.1f MiB, allocated %.1f MiB; nz=1024: peak %.1f MiB, allocated %.1f MiB; engine buffers %.1f MiB",
				mib(p32), mib(a32), mib(p1024), mib(a1024), mib(uint64(st1024.PeakBufferBytes)))
			// The limit check works out the same figure before allocating.
			h := Header{NX: 160, NY: 128, NZ: 64, Type: Uint16}
			_, err := Filter(&MemSink{}, NewGenSource(h, rockSlice(160, 128)), Uint16, []*tensor.Plan{c.plan}, CombineNone,
				FilterOptions{Edge: c.edge, Threads: 2, MaxBufferBytes: st1024.PeakBufferBytes - 1})
			if !errors.Is(err, ErrMemory) {
				t.Errorf("limit one byte below the buffers: %v", err)
			}
			if _, err := Filter(&MemSink{}, NewGenSource(h, rockSlice(160, 128)), Uint16, []*tensor.Plan{c.plan}, CombineNone,
				FilterOptions{Edge: c.edge, Threads: 2, MaxBufferBytes: st1024.PeakBufferBytes}); err != nil {
				t.Errorf("limit equal to the buffers: %v", err)
			}
			if st32.PeakBufferBytes != st1024.PeakBufferBytes {
				t.Errorf("engine buffers %d bytes for 32 slices, %d for 1024", st32.PeakBufferBytes, st1024.PeakBufferBytes)
			}
			if float64(p1024) > 1.1*float64(p32) {
				t.Errorf("peak heap %.1f MiB for 1024 slices, more than 110%% of %.1f MiB for 32", mib(p1024), mib(p32))
			}
			if float64(a1024) > 1.1*float64(a32) {
				t.Errorf("allocated %.1f MiB for 1024 slices, more than 110%% of %.1f MiB for 32", mib(a1024), mib(a32))
			}
			// The whole 1024-slice stack would be 40 MiB as uint16; the engine's
			// buffers must be a small fraction of it.
			if st1024.PeakBufferBytes > 10<<20 {
				t.Errorf("engine buffers %.1f MiB", mib(uint64(st1024.PeakBufferBytes)))
			}
		})
	}
}

func mib(b uint64) float64 { return float64(b) / (1 << 20) }

// TestFilterNoAllocationsPerSlice: once its buffers exist, the engine allocates nothing
// per slice, so a run over 200 slices allocates as often as a run over 20.
func TestFilterNoAllocationsPerSlice(t *testing.T) {
	g := []float64{1, 2, 1}
	plans := []*tensor.Plan{tensor.SeparablePlan(1, g, g, g), densePlan(tensor.Outer(1, g, g, g))}
	count := func(nz, threads int) float64 {
		h := Header{NX: 64, NY: 48, NZ: nz, Type: Uint8}
		gen := rockSlice(64, 48)
		return testing.AllocsPerRun(3, func() {
			src := NewGenSource(h, gen)
			if _, err := Filter(&MemSink{Discard: true}, src, Float32, plans, CombineMagnitude, FilterOptions{Threads: threads}); err != nil {
				t.Fatal(err)
			}
		})
	}
	for _, threads := range []int{1, 2} {
		few, many := count(20, threads), count(200, threads)
		t.Logf("threads %d: %.0f allocations for 20 slices, %.0f for 200", threads, few, many)
		// A handful of allocations may come from the runtime (goroutine stacks growing,
		// timers); 180 more slices must not add one per slice.
		if many > few+10 {
			t.Errorf("threads %d: %.0f allocations for 200 slices, %.0f for 20", threads, many, few)
		}
	}
}
