package tiffstack_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/tripass/tripass/io/tiffstack"
	"github.com/tripass/tripass/volume"
)

// Write a small cleared-tissue block as an LZW-compressed multi-page TIFF and read it
// back slice by slice.
func Example() {
	dir, err := os.MkdirTemp("", "tiffstack-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "block.tif")

	h := volume.Header{NX: 64, NY: 48, NZ: 10, Type: volume.Uint16,
		Spacing: [3]float64{0.65, 0.65, 2}, Unit: "um"}
	w, err := tiffstack.Create(path, h, tiffstack.WriteOptions{Compression: tiffstack.LZW, Predictor: true})
	if err != nil {
		log.Fatal(err)
	}
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	for z := 0; z < h.NZ; z++ {
		for i := 0; i < s.Len(); i++ {
			x, y := i%h.NX-32, i/h.NX-24
			v := 100.0 // background
			if x*x+y*y+(z-5)*(z-5)*9 < 100 {
				v = 3000 // a bright nucleus
			}
			s.Set(i, v)
		}
		if err := w.WriteSlice(s); err != nil {
			w.Abort()
			log.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		log.Fatal(err)
	}

	r, err := tiffstack.Open(path)
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	got := r.Header()
	fmt.Printf("%d×%d×%d %s, spacing %v %s\n", got.NX, got.NY, got.NZ, got.Type, got.Spacing, got.Unit)
	fmt.Println(r.Info())
	var st volume.Stats
	for {
		if err := r.ReadSlice(s); err != nil {
			break // io.EOF after the last slice
		}
		st.Add(s)
	}
	fmt.Printf("min %g, max %g\n", st.Min, st.Max)
	// Output:
	// 64×48×10 uint16, spacing [0.65 0.65 2] um
	// TIFF, little-endian (II), compression LZW, predictor horizontal differencing, strips of 48 rows, 10 pages
	// min 100, max 3000
}
