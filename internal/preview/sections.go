package preview

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/tripass/tripass/volume"
)

// A Section names one of the three orthogonal planes through a voxel.
type Section int

const (
	// XY is the z-slice through the voxel: x across, y down.
	XY Section = iota
	// XZ is the plane of constant y: x across, z down.
	XZ
	// YZ is the plane of constant x: y across, z down.
	YZ
)

// AllSections lists the three sections in the order a preview shows them.
var AllSections = []Section{XY, XZ, YZ}

func (s Section) String() string {
	switch s {
	case XY:
		return "xy"
	case XZ:
		return "xz"
	case YZ:
		return "yz"
	}
	return fmt.Sprintf("Section(%d)", int(s))
}

// Axes returns the volume axes (0 x, 1 y, 2 z) that run across and down the section,
// and the axis it is perpendicular to.
func (s Section) Axes() (across, down, normal int) {
	switch s {
	case XZ:
		return 0, 2, 1
	case YZ:
		return 1, 2, 0
	}
	return 0, 1, 2
}

// ParseSections reads a comma-separated list of section names ("xy,xz,yz", "xy").
func ParseSections(s string) ([]Section, error) {
	var out []Section
	seen := map[Section]bool{}
	for _, p := range strings.Split(s, ",") {
		var sec Section
		switch strings.ToLower(strings.TrimSpace(p)) {
		case "xy", "yx":
			sec = XY
		case "xz", "zx":
			sec = XZ
		case "yz", "zy":
			sec = YZ
		default:
			return nil, fmt.Errorf("unknown section %q (want xy, xz or yz, separated by commas)", p)
		}
		if !seen[sec] {
			seen[sec] = true
			out = append(out, sec)
		}
	}
	return out, nil
}

// A Plane is one section's voxel values, W across by H down, row by row.
type Plane struct {
	Section Section
	W, H    int
	Pix     []float32
}

// At returns the value in column i, row j.
func (p *Plane) At(i, j int) float32 { return p.Pix[j*p.W+i] }

// Sections holds the planes through one voxel of one stack.
type Sections struct {
	// Header is the stack's header with unknown spacings set to 1 (Header.Normalize).
	Header volume.Header
	// At is the voxel (x, y, z) the planes pass through.
	At [3]int
	// Planes are the sections asked for, in the order asked.
	Planes []*Plane
}

// Plane returns the plane of section s, or nil when it was not read.
func (s *Sections) Plane(sec Section) *Plane {
	for _, p := range s.Planes {
		if p.Section == sec {
			return p
		}
	}
	return nil
}

// Centre returns the voxel at the middle of a volume of header h.
func Centre(h volume.Header) [3]int { return [3]int{h.NX / 2, h.NY / 2, h.NZ / 2} }

// ErrOutside reports a section point outside the volume.
var ErrOutside = errors.New("point outside the volume")

// ReadSections reads the sections want (all three when empty) through voxel at of src.
//
// It reads as little as it can: the xy section alone needs only slice z, which it
// reaches by seeking when src implements volume.SliceSeeker and by reading through
// otherwise; the xz and yz sections need a row and a column of every slice, so then
// the whole stack streams once and the xy section is picked up on the way. Memory is
// that of the planes and one slice, whatever the depth of the stack.
func ReadSections(src volume.Source, at [3]int, want []Section) (*Sections, error) {
	h := src.Header()
	if err := h.Validate(); err != nil {
		return nil, err
	}
	n := [3]int{h.NX, h.NY, h.NZ}
	for i := range at {
		if at[i] < 0 || at[i] >= n[i] {
			return nil, fmt.Errorf("%w: %c = %d, want 0 to %d", ErrOutside, "xyz"[i], at[i], n[i]-1)
		}
	}
	if len(want) == 0 {
		want = AllSections
	}
	out := &Sections{Header: h.Normalize(), At: at}
	stream := false
	for _, sec := range want {
		across, down, _ := sec.Axes()
		p := &Plane{Section: sec, W: n[across], H: n[down]}
		if int64(p.W)*int64(p.H) > volume.MaxSliceVoxels {
			return nil, fmt.Errorf("%v section of %d×%d voxels is too large to preview", sec, p.W, p.H)
		}
		p.Pix = make([]float32, p.W*p.H)
		out.Planes = append(out.Planes, p)
		if sec != XY {
			stream = true
		}
	}
	xy, xz, yz := out.Plane(XY), out.Plane(XZ), out.Plane(YZ)
	s := volume.NewSlice(h.NX, h.NY, h.Type)
	read := func(z int) error {
		err := src.ReadSlice(s)
		if err == io.EOF {
			err = io.ErrUnexpectedEOF
		}
		if err != nil {
			return fmt.Errorf("slice %d: %w", z, err)
		}
		if s.NX != h.NX || s.NY != h.NY {
			return fmt.Errorf("slice %d is %d×%d, the header says %d×%d", z, s.NX, s.NY, h.NX, h.NY)
		}
		return nil
	}
	if !stream {
		z0 := 0
		if sk, ok := src.(volume.SliceSeeker); ok {
			if err := sk.SeekSlice(at[2]); err != nil {
				return nil, fmt.Errorf("seeking to slice %d: %w", at[2], err)
			}
			z0 = at[2]
		}
		for z := z0; z <= at[2]; z++ {
			if err := read(z); err != nil {
				return nil, err
			}
		}
		s.ToFloat32(xy.Pix)
		return out, nil
	}
	x, y := at[0], at[1]
	for z := 0; z < h.NZ; z++ {
		if err := read(z); err != nil {
			return nil, err
		}
		if xy != nil && z == at[2] {
			s.ToFloat32(xy.Pix)
		}
		if xz != nil {
			row := xz.Pix[z*h.NX : (z+1)*h.NX]
			for i := range row {
				row[i] = float32(s.At(y*h.NX + i))
			}
		}
		if yz != nil {
			row := yz.Pix[z*h.NY : (z+1)*h.NY]
			for j := range row {
				row[j] = float32(s.At(j*h.NX + x))
			}
		}
	}
	return out, nil
}

// A Window maps values to grey levels: Lo and below are black, Hi and above white.
type Window struct{ Lo, Hi float64 }

// ContrastWindow returns the window from the lo-th to the hi-th percentile (0 to 100)
// of the finite values of every plane in s. Percentiles interpolate linearly between
// the sorted values (NumPy's default "linear" method). A window of zero width is
// widened so that the constant value maps to mid-grey.
func ContrastWindow(s *Sections, lo, hi float64) (Window, error) {
	if !(lo >= 0 && lo < hi && hi <= 100) {
		return Window{}, fmt.Errorf("percentiles %g and %g: want 0 ≤ low < high ≤ 100", lo, hi)
	}
	n := 0
	for _, p := range s.Planes {
		n += len(p.Pix)
	}
	vals := make([]float64, 0, n)
	for _, p := range s.Planes {
		for _, v := range p.Pix {
			if !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0) {
				vals = append(vals, float64(v))
			}
		}
	}
	if len(vals) == 0 {
		return Window{0, 1}, nil
	}
	w := Window{percentile(vals, lo), percentile(vals, hi)}
	if !(w.Hi > w.Lo) {
		d := math.Max(math.Abs(w.Lo)*1e-6, 1e-6)
		w = Window{w.Lo - d, w.Lo + d}
	}
	return w, nil
}

// percentile returns the q-th percentile of vals (which it reorders), interpolating
// linearly between order statistics at rank q/100·(n−1).
func percentile(vals []float64, q float64) float64 {
	r := q / 100 * float64(len(vals)-1)
	k := int(math.Floor(r))
	a := selectKth(vals, k)
	if k+1 >= len(vals) {
		return a
	}
	// After selection, everything beyond k is ≥ a; the next order statistic is its minimum.
	b := math.Inf(1)
	for _, v := range vals[k+1:] {
		b = math.Min(b, v)
	}
	return a + (r-float64(k))*(b-a)
}

// selectKth reorders v so that v[k] is the value of rank k, smaller values before it
// and larger after, and returns v[k]: C. A. R. Hoare's selection ("Algorithm 65: Find",
// Communications of the ACM 4(7):321–322, 1961), with a median-of-three pivot against
// sorted runs. Expected time is linear in len(v).
func selectKth(v []float64, k int) float64 {
	lo, hi := 0, len(v)-1
	for lo < hi {
		mid := lo + (hi-lo)/2
		// Median of three as pivot, against sorted and constant runs.
		if v[mid] < v[lo] {
			v[mid], v[lo] = v[lo], v[mid]
		}
		if v[hi] < v[lo] {
			v[hi], v[lo] = v[lo], v[hi]
		}
		if v[hi] < v[mid] {
			v[hi], v[mid] = v[mid], v[hi]
		}
		pivot := v[mid]
		i, j := lo, hi
		for i <= j {
			for v[i] < pivot {
				i++
			}
			for v[j] > pivot {
				j--
			}
			if i <= j {
				v[i], v[j] = v[j], v[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return v[k]
		}
	}
	return v[k]
}
