package volume

import (
	"math"
	"testing"
)

func TestFromFloat32RoundsAndClamps(t *testing.T) {
	src := []float32{-1, 0.49, 0.5, 1.5, 2.5, 254.6, 300, float32(math.NaN()), -0.4, 255.4, -0.5}
	tests := []struct {
		t       SampleType
		want    []float64
		clamped int
	}{
		// Round half away from zero, clamp to [0,255], NaN → 0 (common practice).
		// A value that rounds into the range is not clamped (−0.4 → 0, 255.4 → 255);
		// −0.5 rounds to −1 and is.
		{Uint8, []float64{0, 0, 1, 2, 3, 255, 255, 0, 0, 255, 0}, 4},
		{Int16, []float64{-1, 0, 1, 2, 3, 255, 300, 0, 0, 255, -1}, 1},
		{Uint16, []float64{0, 0, 1, 2, 3, 255, 300, 0, 0, 255, 0}, 3},
	}
	for _, tt := range tests {
		s := NewSlice(len(src), 1, tt.t)
		if c := s.FromFloat32(src); c != tt.clamped {
			t.Errorf("%v: clamped %d, want %d", tt.t, c, tt.clamped)
		}
		for i, w := range tt.want {
			if got := s.At(i); got != w {
				t.Errorf("%v[%d] = %v, want %v", tt.t, i, got, w)
			}
		}
	}
}

func TestConvertIsExactForEveryTypePair(t *testing.T) {
	vals := []float64{0, 1, 127, 255, 256, 32767, 65535, -32768, 1 << 24, 4294967295, -2147483648, 0.25}
	for _, from := range SampleTypes {
		for _, to := range SampleTypes {
			src := NewSlice(len(vals), 1, from)
			for i, v := range vals {
				src.Set(i, v)
			}
			dst := &Slice{Type: to}
			Convert(dst, src)
			lo, hi := to.Range()
			for i := range vals {
				in := src.At(i)
				want := math.Max(lo, math.Min(hi, in))
				if !to.IsFloat() {
					want = math.Round(want)
				} else if to == Float32 {
					want = float64(float32(want))
				}
				if got := dst.At(i); got != want {
					t.Errorf("%v→%v: %v became %v, want %v", from, to, in, got, want)
				}
			}
		}
	}
}

func TestToFloat32AllTypes(t *testing.T) {
	for _, typ := range SampleTypes {
		s := NewSlice(3, 2, typ)
		for i := 0; i < 6; i++ {
			s.Set(i, float64(i*7))
		}
		f := make([]float32, 6)
		s.ToFloat32(f)
		for i, v := range f {
			if v != float32(i*7) {
				t.Errorf("%v: [%d] = %v, want %d", typ, i, v, i*7)
			}
		}
	}
}

func TestStatsWelford(t *testing.T) {
	s := NewSlice(5, 1, Float32)
	s.FromFloat32([]float32{1, 2, 3, 4, float32(math.NaN())})
	var st Stats
	st.Add(s)
	// Population standard deviation of 1,2,3,4 is sqrt(1.25) (common practice).
	if st.Min != 1 || st.Max != 4 || st.Mean != 2.5 || math.Abs(st.Std-math.Sqrt(1.25)) > 1e-15 || st.NaN != 1 {
		t.Errorf("stats %+v", st)
	}
}
