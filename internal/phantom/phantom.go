// Package phantom synthesises test and demo volumes slice by slice, so that a stack of
// any depth can be produced without holding it in memory. The scenes are our own: a
// porous rock core (a cylinder of mineral grains and pores in a matrix, as a micro-CT
// scan shows it) and a cleared-tissue block with bright nuclei (as a light-sheet stack
// shows it).
package phantom

import (
	"io"
	"math"
	"math/rand/v2"

	"github.com/tripass/tripass/volume"
)

// A sphere is one grain, pore or nucleus of a scene.
type sphere struct {
	x, y, z, r float64 // centre and radius in voxels
	value      float64 // intensity inside
}

// Source is a synthetic volume generated slice by slice. It implements volume.Source
// and volume.SliceSeeker.
type Source struct {
	h          volume.Header
	z          int
	background func(x, y, z float64) float64
	spheres    []sphere
	noise      float64
	seed       uint64
	row        []float64
	blur       float64 // half-width of the soft edge of spheres, voxels
}

var _ volume.Source = (*Source)(nil)
var _ volume.SliceSeeker = (*Source)(nil)

// RockCore returns a phantom of a cylindrical rock core, nx×ny×nz voxels of uint16,
// spacing (sx, sy, sz) in micrometres: a quartz-like matrix with brighter dense grains,
// dark pores (air) and Gaussian noise, outside the core air. The same arguments always
// give the same volume.
func RockCore(nx, ny, nz int, spacing [3]float64, seed uint64) *Source {
	rng := rand.New(rand.NewPCG(seed, 0x70726f63))
	cx, cy := float64(nx-1)/2, float64(ny-1)/2
	rc := 0.45 * math.Min(float64(nx), float64(ny))
	s := &Source{
		h: volume.Header{NX: nx, NY: ny, NZ: nz, Spacing: spacing, Unit: "um", Type: volume.Uint16},
		background: func(x, y, z float64) float64 {
			d := math.Hypot(x-cx, y-cy)
			// A soft rim over 1.5 voxels between matrix and air.
			t := clamp01((rc - d) / 1.5)
			return 1200 + t*(18000-1200)
		},
		noise: 600,
		seed:  seed,
		blur:  0.7,
	}
	// Physical radii: grains and pores of about 15–60 µm, so anisotropic voxels give
	// ellipsoids in voxel space, as a real anisotropic scan would.
	n := int(float64(nx*ny*nz) / 2500)
	if n < 8 {
		n = 8
	}
	for i := 0; i < n; i++ {
		ang, rad := rng.Float64()*2*math.Pi, rc*math.Sqrt(rng.Float64())
		sp := sphere{
			x: cx + rad*math.Cos(ang),
			y: cy + rad*math.Sin(ang),
			z: rng.Float64() * float64(nz-1),
			r: 15 + 45*rng.Float64(),
		}
		if rng.Float64() < 0.4 {
			sp.value = 1500 + 1500*rng.Float64() // pore: air or resin
		} else {
			sp.value = 26000 + 12000*rng.Float64() // dense mineral grain
		}
		s.spheres = append(s.spheres, sp)
	}
	s.h.Spacing = positive(spacing)
	return s
}

// TissueBlock returns a phantom of a cleared-tissue block, nx×ny×nz voxels of uint16:
// a dim autofluorescent background with a gentle gradient along z (light-sheet
// attenuation), bright nuclei of 3–6 µm radius, and Poisson-like noise.
func TissueBlock(nx, ny, nz int, spacing [3]float64, seed uint64) *Source {
	rng := rand.New(rand.NewPCG(seed, 0x6e75636c))
	fz := float64(nz)
	s := &Source{
		h: volume.Header{NX: nx, NY: ny, NZ: nz, Spacing: spacing, Unit: "um", Type: volume.Uint16},
		background: func(x, y, z float64) float64 {
			return 300 + 200*(1-z/fz)
		},
		noise: 40,
		seed:  seed,
		blur:  0.8,
	}
	n := int(float64(nx*ny*nz) / 1200)
	for i := 0; i < n; i++ {
		s.spheres = append(s.spheres, sphere{
			x: rng.Float64() * float64(nx-1), y: rng.Float64() * float64(ny-1), z: rng.Float64() * float64(nz-1),
			r: 3 + 3*rng.Float64(), value: 3000 + 5000*rng.Float64(),
		})
	}
	s.h.Spacing = positive(spacing)
	return s
}

// positive returns spacing with non-positive entries set to 1.
func positive(spacing [3]float64) [3]float64 {
	for i := range spacing {
		if spacing[i] <= 0 {
			spacing[i] = 1
		}
	}
	return spacing
}

// Header describes the phantom.
func (s *Source) Header() volume.Header { return s.h }

// SeekSlice makes the next ReadSlice return slice z.
func (s *Source) SeekSlice(z int) error {
	if z < 0 || z > s.h.NZ {
		return io.ErrUnexpectedEOF
	}
	s.z = z
	return nil
}

// Close does nothing; it is there to satisfy volume.Source.
func (s *Source) Close() error { return nil }

// ReadSlice renders the next slice into dst.
func (s *Source) ReadSlice(dst *volume.Slice) error {
	if s.z >= s.h.NZ {
		return io.EOF
	}
	h := s.h
	dst.Reset(h.NX, h.NY, h.Type)
	if cap(s.row) < h.NX*h.NY {
		s.row = make([]float64, h.NX*h.NY)
	}
	v := s.row[:h.NX*h.NY]
	z := float64(s.z)
	for j := 0; j < h.NY; j++ {
		for i := 0; i < h.NX; i++ {
			v[j*h.NX+i] = s.background(float64(i), float64(j), z)
		}
	}
	sx, sy, sz := h.Spacing[0], h.Spacing[1], h.Spacing[2]
	for _, sp := range s.spheres {
		dz := (z - sp.z) * sz
		if math.Abs(dz) > sp.r+s.blur*sz {
			continue
		}
		rxy := math.Sqrt(math.Max(sp.r*sp.r-dz*dz, 0))
		j0, j1 := clampInt(int(sp.y-rxy/sy)-2, 0, h.NY-1), clampInt(int(sp.y+rxy/sy)+2, 0, h.NY-1)
		i0, i1 := clampInt(int(sp.x-rxy/sx)-2, 0, h.NX-1), clampInt(int(sp.x+rxy/sx)+2, 0, h.NX-1)
		for j := j0; j <= j1; j++ {
			dy := (float64(j) - sp.y) * sy
			for i := i0; i <= i1; i++ {
				dx := (float64(i) - sp.x) * sx
				d := math.Sqrt(dx*dx + dy*dy + dz*dz)
				// Soft edge: full value inside r − blur, background beyond r + blur.
				t := clamp01((sp.r-d)/(2*s.blur*sx) + 0.5)
				if t > 0 {
					k := j*h.NX + i
					v[k] += t * (sp.value - v[k])
				}
			}
		}
	}
	// Noise from a generator seeded per slice, so that seeking gives the same slice.
	rng := rand.New(rand.NewPCG(s.seed, uint64(s.z)+1))
	for k, x := range v {
		dst.Set(k, x+s.noise*rng.NormFloat64())
	}
	s.z++
	return nil
}

func clamp01(t float64) float64 { return math.Max(0, math.Min(1, t)) }

func clampInt(v, lo, hi int) int {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}
