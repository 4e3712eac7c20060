package volume_test

import (
	"fmt"

	"github.com/tripass/tripass/tensor"
	"github.com/tripass/tripass/volume"
)

// Smooth a small synthetic stack (a bright voxel in a dark 5×5×5 block) with the
// separable binomial kernel [1 2 1]/4 along each axis, streaming slice by slice.
func ExampleFilter() {
	h := volume.Header{NX: 5, NY: 5, NZ: 5, Type: volume.Uint16}
	data := make([]float32, 125)
	data[2+5*(2+5*2)] = 6400 // the centre voxel; the kernel's centre tap is 8/64
	b := []float64{1, 2, 1}
	plan := tensor.SeparablePlan(1.0/64, b, b, b)

	var out volume.MemSink
	st, err := volume.Filter(&out, volume.NewMemSource(h, data), volume.Float32,
		[]*tensor.Plan{plan}, volume.CombineNone, volume.FilterOptions{Edge: volume.EdgeReplicate})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println("slices written:", st.Slices)
	for y := 1; y < 4; y++ { // row y of the middle slice, x = 1..3
		fmt.Println(out.Data[5*(y+5*2)+1 : 5*(y+5*2)+4])
	}
	// Output:
	// slices written: 5
	// [200 400 200]
	// [400 800 400]
	// [200 400 200]
}
