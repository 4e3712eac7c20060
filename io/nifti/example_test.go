package nifti_test

import (
	"fmt"
	"log"
	"os"
	"path/filepath"

	"github.com/tripass/tripass/io/nifti"
	"github.com/tripass/tripass/volume"
)

// A cleared-tissue block is written as .nii.gz with a placement of its own, then read
// back slice by slice; the placement comes back unchanged, ready to be carried into a
// filtered output.
func Example() {
	dir, err := os.MkdirTemp("", "nifti-example")
	if err != nil {
		log.Fatal(err)
	}
	defer os.RemoveAll(dir)
	path := filepath.Join(dir, "block.nii.gz")

	h := volume.Header{NX: 6, NY: 5, NZ: 4, Type: volume.Uint16, Spacing: [3]float64{0.5, 0.5, 2}, Unit: "um"}
	placement := nifti.PlainOrientation(h)
	placement.Srow[0][3], placement.Srow[1][3], placement.Srow[2][3] = 100, 200, -50 // block's corner, µm
	w, err := nifti.Create(path, h, nifti.WriteOptions{Orientation: &placement, Description: "cleared tissue block"})
	if err != nil {
		log.Fatal(err)
	}
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	for z := 0; z < h.NZ; z++ {
		for i := 0; i < s.Len(); i++ {
			s.Set(i, 0)
		}
		s.Set(2*h.NX+3, float64(1000*(z+1))) // one bright nucleus per slice at x 3, y 2
		if err := w.WriteSlice(s); err != nil {
			log.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		log.Fatal(err)
	}

	r, err := nifti.Open(path)
	if err != nil {
		log.Fatal(err)
	}
	defer r.Close()
	rh := r.Header()
	fmt.Printf("%d×%d×%d %v, spacing %v %s\n", rh.NX, rh.NY, rh.NZ, rh.Type, rh.Spacing, rh.Unit)
	fmt.Println(r.Description(), "| compressed:", r.Compressed())
	a := r.Orientation().Affine(rh.Spacing)
	fmt.Println("voxel (3,2,1) is at", a[0][0]*3+a[0][3], a[1][1]*2+a[1][3], a[2][2]*1+a[2][3], "um")
	r.SeekSlice(1)
	r.ReadSlice(s)
	fmt.Println("nucleus in slice 1:", s.At(2*h.NX+3))
	// Output:
	// 6×5×4 uint16, spacing [0.5 0.5 2] um
	// cleared tissue block | compressed: true
	// voxel (3,2,1) is at 101.5 201 -48 um
	// nucleus in slice 1: 2000
}
