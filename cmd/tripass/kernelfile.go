package main

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/io/kerneltext"
	"github.com/tripass/tripass/io/npy"
	"github.com/tripass/tripass/tensor"
)

// kernelFileHelp is the paragraph every command that reads or writes kernel files
// shows in its help.
const kernelFileHelp = `Kernel files: NumPy .npy (float16, float32, float64 or integer; either byte order; C or
Fortran order) or tripass's text format (.txt). A 3D .npy array has shape (kz, ky, kx):
the last axis is x, as in a stack read slice by slice; a 2D array (ky, kx) is a flat
kernel in the x-y plane and a 1D array (kx) a kernel along x. The text format has one
row along x per line, rows stacked along y, z-slices separated by a blank line, and '#'
comments. The origin of the kernel is its centre tap along each axis of odd size; along
an axis of even size n it is tap n/2 counting from 0 (the later of the two middle taps).
At most 1023 taps per axis and 16777216 in all.`

// loadKernel reads a kernel file by its extension (.npy or .txt) and returns it as a
// kx×ky×kz tensor. Errors are one line naming the file; a malformed file is an input
// error, an unknown extension a usage error.
func loadKernel(path string) (*tensor.Dense, error) {
	var shape []int
	var data []float64
	switch strings.ToLower(filepath.Ext(path)) {
	case ".npy":
		a, err := readKernelNPY(path)
		if err != nil {
			return nil, err
		}
		shape, data = a.Shape, a.Data
	case ".txt":
		f, err := os.Open(path)
		if err != nil {
			return nil, openKernelError(path, err)
		}
		defer f.Close()
		a, err := kerneltext.Read(f)
		if err != nil {
			return nil, inputError(fmt.Errorf("kernel %s: %w", path, err))
		}
		shape, data = a.Shape, a.Data
	default:
		return nil, usageErrorf("kernel %s: cannot tell the format from the name (want .npy or .txt)", path)
	}
	d := [3]int{1, 1, 1} // (kx, ky, kz) from a NumPy-order shape (…, ky, kx)
	for i, n := range shape {
		d[len(shape)-1-i] = n
	}
	k := &tensor.Dense{I: d[0], J: d[1], K: d[2], Data: data}
	for n, v := range data {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			x, y, z := n%d[0], n/d[0]%d[1], n/(d[0]*d[1])
			return nil, inputError(fmt.Errorf("kernel %s: tap (x=%d, y=%d, z=%d) is %v", path, x, y, z, v))
		}
	}
	return k, nil
}

// readKernelNPY reads a .npy kernel, refusing shapes that are not 1D–3D or exceed the
// kernel limits before the data are read.
func readKernelNPY(path string) (*npy.Array, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, openKernelError(path, err)
	}
	defer f.Close()
	bad := func(err error) error { return inputError(fmt.Errorf("kernel %s: %w", path, err)) }
	h, err := npy.ReadHeader(f)
	if err != nil {
		return nil, bad(err)
	}
	if len(h.Shape) < 1 || len(h.Shape) > 3 {
		return nil, bad(fmt.Errorf("array of shape %v: a kernel has 1, 2 or 3 axes", h.Shape))
	}
	for _, n := range h.Shape {
		if n < 1 {
			return nil, bad(fmt.Errorf("array of shape %v is empty", h.Shape))
		}
		if n > kerneltext.MaxAxis {
			return nil, bad(fmt.Errorf("array of shape %v: more than %d taps along an axis", h.Shape, kerneltext.MaxAxis))
		}
	}
	if h.Len() > kerneltext.MaxTaps {
		return nil, bad(fmt.Errorf("array of shape %v: more than %d taps", h.Shape, kerneltext.MaxTaps))
	}
	if st, err := f.Stat(); err == nil && st.Mode().IsRegular() {
		if err := h.CheckSize(st.Size()); err != nil {
			return nil, bad(err)
		}
	}
	a, err := npy.ReadData(f, h)
	if err != nil {
		return nil, bad(err)
	}
	return a, nil
}

func openKernelError(path string, err error) error {
	var pe *fs.PathError
	if errors.As(err, &pe) {
		err = pe.Err
	}
	if errors.Is(err, fs.ErrNotExist) {
		return inputError(fmt.Errorf("kernel %s: no such file", path))
	}
	return ioError(fmt.Errorf("kernel %s: %w", path, err))
}

// writeKernel writes k to path as .npy (float64, or float32 if f32) or text, chosen by
// the extension, under a temporary name that becomes path only when complete. A 3D
// .npy array of shape (kz, ky, kx) is written even for a flat kernel, so that the
// axes are never ambiguous.
func writeKernel(path string, k *tensor.Dense, f32, overwrite bool) error {
	ext := strings.ToLower(filepath.Ext(path))
	if ext != ".npy" && ext != ".txt" {
		return usageErrorf("%s: cannot tell the kernel format from the name (want .npy or .txt)", path)
	}
	f, err := atomicfile.Create(path, overwrite)
	if err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return usageErrorf("%s: %v", path, err)
		}
		return ioError(fmt.Errorf("%s: %w", path, err))
	}
	shape := []int{k.K, k.J, k.I}
	switch {
	case ext == ".txt":
		err = kerneltext.Write(f, &kerneltext.Array{Shape: shape, Data: k.Data})
	case f32:
		err = npy.WriteFloat32(f, &npy.Array{Shape: shape, Data: k.Data})
	default:
		err = npy.Write(f, &npy.Array{Shape: shape, Data: k.Data})
	}
	if err != nil {
		f.Abort()
		return ioError(fmt.Errorf("%s: %w", path, err))
	}
	if err := f.Commit(); err != nil {
		return ioError(fmt.Errorf("%s: %w", path, err))
	}
	return nil
}

// analyzeOptions returns the planner options for kernel k: a kernel whose taps are all
// float32 values (as a float32 .npy file holds) is judged exact up to float32's
// rounding, so that a separable kernel saved in float32 is still called separable.
func analyzeOptions(k *tensor.Dense, tol float64) tensor.AnalyzeOptions {
	opt := tensor.AnalyzeOptions{Tolerance: tol}
	for _, v := range k.Data {
		if float64(float32(v)) != v {
			return opt
		}
	}
	opt.ExactZero = tensor.Float32ExactZero
	return opt
}
