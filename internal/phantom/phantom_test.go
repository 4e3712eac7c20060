package phantom

import (
	"io"
	"testing"

	"github.com/tripass/tripass/volume"
)

func TestRockCoreDeterministicAndSeekable(t *testing.T) {
	src := RockCore(40, 36, 12, [3]float64{5, 5, 8}, 7)
	st, err := volume.ReadStats(src)
	if err != nil {
		t.Fatal(err)
	}
	// The core holds matrix (~18000), grains (26000–38000) and pores; air outside ~1200.
	if st.Min > 5000 || st.Max < 20000 || st.NaN != 0 {
		t.Errorf("unexpected value range: %+v", st)
	}
	a := volume.NewSlice(40, 36, volume.Uint16)
	b := volume.NewSlice(40, 36, volume.Uint16)
	src2 := RockCore(40, 36, 12, [3]float64{5, 5, 8}, 7)
	if err := src2.SeekSlice(5); err != nil {
		t.Fatal(err)
	}
	src2.ReadSlice(a)
	src3 := RockCore(40, 36, 12, [3]float64{5, 5, 8}, 7)
	for z := 0; z <= 5; z++ {
		src3.ReadSlice(b)
	}
	if string(a.Data) != string(b.Data) {
		t.Error("slice 5 differs between seeking and reading in order")
	}
	src3.SeekSlice(12)
	if err := src3.ReadSlice(b); err != io.EOF {
		t.Errorf("read past the end: %v, want io.EOF", err)
	}
}

func TestTissueBlockHasBrightNuclei(t *testing.T) {
	st, err := volume.ReadStats(TissueBlock(64, 64, 16, [3]float64{1, 1, 2}, 3))
	if err != nil {
		t.Fatal(err)
	}
	if st.Max < 2500 || st.Mean > 1500 {
		t.Errorf("want sparse bright nuclei on a dim background: %+v", st)
	}
}
