package volume

import (
	"math"

	"github.com/tripass/tripass/tensor"
)

// naiveConvolve is the definition, computed voxel by voxel in float64: out(x) =
// Σ_j K(j)·f_ext(x + c − j), with f_ext the edge extension and c = tensor.Center(n) per
// axis. It is slow and simple on purpose; tests use it to check the engine on random
// cases beyond the SciPy fixtures.
func naiveConvolve(data []float32, shape [3]int, k *tensor.Dense, edge Edge, fill float64) []float64 {
	nx, ny, nz := shape[0], shape[1], shape[2]
	cx, cy, cz := tensor.Center(k.I), tensor.Center(k.J), tensor.Center(k.K)
	out := make([]float64, nx*ny*nz)
	for z := 0; z < nz; z++ {
		for y := 0; y < ny; y++ {
			for x := 0; x < nx; x++ {
				s := 0.0
				for kk := 0; kk < k.K; kk++ {
					zz, okz := edge.Index(z+cz-kk, nz)
					for j := 0; j < k.J; j++ {
						yy, oky := edge.Index(y+cy-j, ny)
						for i := 0; i < k.I; i++ {
							w := k.At(i, j, kk)
							if w == 0 {
								continue
							}
							xx, okx := edge.Index(x+cx-i, nx)
							v := fill
							if okx && oky && okz {
								v = float64(data[xx+nx*(yy+ny*zz)])
							}
							s += w * v
						}
					}
				}
				out[x+nx*(y+ny*z)] = s
			}
		}
	}
	return out
}

func maxRelErr64(got []float32, want []float64) float64 {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, v := range want {
		lo, hi = min(lo, v), max(hi, v)
	}
	rng := hi - lo
	if rng == 0 {
		rng = max(math.Abs(hi), 1)
	}
	m := 0.0
	for i := range want {
		d := math.Abs(float64(got[i]) - want[i])
		if d != d {
			return math.Inf(1)
		}
		m = max(m, d)
	}
	return m / rng
}
