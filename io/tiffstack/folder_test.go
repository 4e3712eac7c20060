package tiffstack

import (
	"slices"
	"testing"
)

// TestSliceNumbers checks which number in a file name orders a slice folder. Expected
// values follow the rule documented on OpenFolder (natural order of the last number;
// the rightmost varying one when the last is shared by every name).
func TestSliceNumbers(t *testing.T) {
	cases := []struct {
		names []string
		want  []uint64 // nil: an error
	}{
		{[]string{"slice_2.tif", "slice_10.tif", "slice_1.tif"}, []uint64{2, 10, 1}},
		{[]string{"z0000.tif", "z0001.tif"}, []uint64{0, 1}},
		{[]string{"stack_z0001_c0.tif", "stack_z0002_c0.tif"}, []uint64{1, 2}},
		{[]string{"run2_t5_z07_c1.tiff", "run2_t5_z08_c1.tiff"}, []uint64{7, 8}},
		{[]string{"a1_2.tif", "a1_3.tif"}, []uint64{2, 3}},
		{[]string{"s1.tif", "s_v2_3.tif"}, []uint64{1, 3}}, // different counts: the last
		{[]string{"image.tif"}, []uint64{0}},
		{[]string{"image.tif", "image2.tif"}, nil},
		{[]string{"s99999999999999999999999.tif"}, nil}, // beyond uint64
	}
	for _, c := range cases {
		got, err := sliceNumbers("dir", c.names)
		if c.want == nil {
			if err == nil {
				t.Errorf("%v: %v, want an error", c.names, got)
			}
			continue
		}
		if err != nil || !slices.Equal(got, c.want) {
			t.Errorf("%v: %v, %v, want %v", c.names, got, err, c.want)
		}
	}
}
