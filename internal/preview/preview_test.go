package preview

import (
	"fmt"
	"image"
	"io"
	"math"
	"math/rand/v2"
	"sort"
	"testing"

	"github.com/tripass/tripass/internal/phantom"
	"github.com/tripass/tripass/volume"
)

// memSource is a float32 volume held in memory, read slice by slice. It counts the
// slices read and can refuse to seek, to check what ReadSections reads.
type memSource struct {
	h      volume.Header
	v      []float32
	z      int
	reads  int
	noSeek bool
}

func newMem(nx, ny, nz int, spacing [3]float64, unit string) *memSource {
	return &memSource{
		h: volume.Header{NX: nx, NY: ny, NZ: nz, Spacing: spacing, Unit: unit, Type: volume.Float32},
		v: make([]float32, nx*ny*nz),
	}
}

func (m *memSource) set(x, y, z int, v float32) { m.v[(z*m.h.NY+y)*m.h.NX+x] = v }
func (m *memSource) get(x, y, z int) float32    { return m.v[(z*m.h.NY+y)*m.h.NX+x] }
func (m *memSource) Header() volume.Header      { return m.h }
func (m *memSource) Close() error               { return nil }

func (m *memSource) ReadSlice(dst *volume.Slice) error {
	n := m.h.NX * m.h.NY
	if (m.z+1)*n > len(m.v) { // past the voxels held, whatever the header says
		return io.EOF
	}
	dst.Reset(m.h.NX, m.h.NY, volume.Float32)
	dst.FromFloat32(m.v[m.z*n : (m.z+1)*n])
	m.z++
	m.reads++
	return nil
}

// seekable wraps a memSource with SeekSlice.
type seekable struct{ *memSource }

func (s seekable) SeekSlice(z int) error { s.z = z; return nil }

func TestReadSectionsPicksTheRightVoxels(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	m := newMem(7, 5, 6, [3]float64{1, 1, 1}, "")
	for i := range m.v {
		m.v[i] = rng.Float32()
	}
	at := [3]int{2, 3, 4}
	tests := []struct {
		name      string
		want      []Section
		seek      bool
		wantReads int
	}{
		{"all three, seekable", nil, true, 6},
		{"xy only, seekable", []Section{XY}, true, 1},
		{"xy only, read through", []Section{XY}, false, 5},
		{"yz and xy", []Section{YZ, XY}, false, 6},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m.z, m.reads = 0, 0
			var src volume.Source = m
			if tt.seek {
				src = seekable{m}
			}
			s, err := ReadSections(src, at, tt.want)
			if err != nil {
				t.Fatal(err)
			}
			if m.reads != tt.wantReads {
				t.Errorf("read %d slices, want %d", m.reads, tt.wantReads)
			}
			for _, p := range s.Planes {
				for j := 0; j < p.H; j++ {
					for i := 0; i < p.W; i++ {
						var want float32
						switch p.Section {
						case XY:
							want = m.get(i, j, at[2])
						case XZ:
							want = m.get(i, at[1], j)
						case YZ:
							want = m.get(at[0], i, j)
						}
						if got := p.At(i, j); got != want {
							t.Fatalf("%v(%d,%d) = %v, want %v", p.Section, i, j, got, want)
						}
					}
				}
			}
		})
	}
}

func TestReadSectionsErrors(t *testing.T) {
	m := newMem(4, 4, 4, [3]float64{}, "")
	if _, err := ReadSections(m, [3]int{4, 0, 0}, nil); err == nil {
		t.Error("point outside the volume accepted")
	}
	m.h.NZ = 6 // the header claims more slices than there are
	if _, err := ReadSections(m, [3]int{1, 1, 1}, nil); err == nil || !errorsIs(err, io.ErrUnexpectedEOF) {
		t.Errorf("truncated stack: %v, want io.ErrUnexpectedEOF", err)
	}
}

func errorsIs(err, target error) bool {
	for err != nil {
		if err == target {
			return true
		}
		u, ok := err.(interface{ Unwrap() error })
		if !ok {
			return false
		}
		err = u.Unwrap()
	}
	return false
}

func TestPercentileMatchesNumPy(t *testing.T) {
	a := []float64{3, 1, 4, 1, 5, 9, 2, 6, 5, 3, 5, 8, 9, 7, 9}
	b := make([]float64, 1000)
	for i := range b {
		b[i] = math.Pow(float64(i), 1.5)
	}
	tests := []struct {
		vals []float64
		q    float64
		want float64 // expected: numpy.percentile(vals, q), NumPy 1.24.2 (Debian 12), method "linear"
	}{
		{a, 0, 1}, {a, 0.5, 1}, {a, 25, 3}, {a, 50, 5}, {a, 99.5, 9}, {a, 100, 9},
		{b, 0.5, 11.164438188061455}, {b, 99.5, 31338.835465326658},
	}
	for _, tt := range tests {
		v := append([]float64(nil), tt.vals...)
		rand.New(rand.NewPCG(2, 2)).Shuffle(len(v), func(i, j int) { v[i], v[j] = v[j], v[i] })
		if got := percentile(v, tt.q); math.Abs(got-tt.want) > 1e-9*math.Max(1, math.Abs(tt.want)) {
			t.Errorf("percentile(%d values, %g) = %.12g, want %.12g", len(tt.vals), tt.q, got, tt.want)
		}
	}
}

func TestShortNumbers(t *testing.T) {
	for _, tt := range []struct {
		v    float64
		want string
	}{{37290.4, "37290"}, {5.0749, "5.075"}, {0.01234, "0.01234"}, {-2.5, "-2.5"}, {0, "0"}, {1e7, "1e+07"}, {2e-5, "2e-05"}, {100, "100"}} {
		if got := short(tt.v); got != tt.want {
			t.Errorf("short(%g) = %q, want %q", tt.v, got, tt.want)
		}
	}
}

func TestNiceLengthAndLabel(t *testing.T) {
	tests := []struct {
		target float64
		unit   string
		want   float64
		label  string
	}{
		{230, "um", 200, "200 µm"},
		{0.7, "um", 0.5, "500 nm"},
		{4.9, "mm", 2, "2 mm"},
		{1200, "um", 1000, "1 mm"},
		{5, "um", 5, "5 µm"},
		{0.03, "m", 0.02, "20 mm"},
	}
	for _, tt := range tests {
		got := niceLength(tt.target)
		if math.Abs(got-tt.want) > 1e-12*tt.want {
			t.Errorf("niceLength(%g) = %g, want %g", tt.target, got, tt.want)
		}
		if l := lengthLabel(got, tt.unit); l != tt.label {
			t.Errorf("lengthLabel(%g, %s) = %q, want %q", got, tt.unit, l, tt.label)
		}
	}
}

// brightest returns the bounding box of the pixels of r in img that hold its largest
// value, and how many there are.
func brightest(img *image.Gray, r image.Rectangle) (image.Rectangle, int) {
	var box image.Rectangle
	bestV, count := -1, 0
	for y := r.Min.Y; y < r.Max.Y; y++ {
		for x := r.Min.X; x < r.Max.X; x++ {
			v := int(img.GrayAt(x, y).Y)
			p := image.Rectangle{image.Pt(x, y), image.Pt(x+1, y+1)}
			switch {
			case v > bestV:
				box, bestV, count = p, v, 1
			case v == bestV:
				box, count = box.Union(p), count+1
			}
		}
	}
	return box, count
}

// nearestPixels returns the pixels, among px covering n voxels, whose centres lie
// nearest to the centre of voxel v: the one whose square holds that centre, or the two
// that share it when the centre falls on their common edge.
func nearestPixels(v, n, px int) (lo, hi int) {
	c := (float64(v) + 0.5) * float64(px) / float64(n)
	if r := math.Round(c); math.Abs(c-r) < 1e-9 {
		return int(r) - 1, int(r)
	}
	return int(math.Floor(c)), int(math.Floor(c))
}

// TestBrightVoxelLandsWhereTheLayoutSays renders a volume holding one bright voxel and
// checks, from the layout alone, the size of every panel and the pixel the voxel must
// light up in each section: the pixel whose square contains the voxel's centre, at
// (i + 0.5)·spacing from the panel's edge.
func TestBrightVoxelLandsWhereTheLayoutSays(t *testing.T) {
	tests := []struct {
		name    string
		n       [3]int
		spacing [3]float64
		width   int
		voxel   [3]int
	}{
		{"isotropic, enlarged", [3]int{20, 16, 12}, [3]float64{1, 1, 1}, 200, [3]int{5, 9, 7}},
		{"anisotropic z, enlarged", [3]int{24, 20, 10}, [3]float64{0.5, 0.5, 2}, 240, [3]int{17, 4, 3}},
		{"anisotropic, shrunk", [3]int{300, 200, 40}, [3]float64{2, 3, 10}, 150, [3]int{101, 57, 21}},
		{"y wider than x", [3]int{10, 30, 8}, [3]float64{1, 1, 4}, 120, [3]int{3, 22, 5}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := newMem(tt.n[0], tt.n[1], tt.n[2], tt.spacing, "um")
			m.set(tt.voxel[0], tt.voxel[1], tt.voxel[2], 1000)
			s, err := ReadSections(m, tt.voxel, nil)
			if err != nil {
				t.Fatal(err)
			}
			img, lay, err := Render([]*Sections{s}, Options{Width: tt.width, Windows: []Window{{0, 1000}}})
			if err != nil {
				t.Fatal(err)
			}
			// Expected scale: the widest section (x extent or y extent) spans the width.
			ext := [3]float64{}
			for a := range ext {
				ext[a] = float64(tt.n[a]) * tt.spacing[a]
			}
			scale := math.Max(ext[0], ext[1]) / float64(tt.width)
			if math.Abs(lay.Scale-scale) > 1e-12*scale {
				t.Errorf("scale %g per pixel, want %g", lay.Scale, scale)
			}
			for k, sec := range []Section{XY, XZ, YZ} {
				r := lay.Panels[0][k]
				if !r.In(img.Bounds()) {
					t.Fatalf("%v panel %v outside the image %v", sec, r, img.Bounds())
				}
				a, d, _ := sec.Axes()
				wantW := int(math.Round(ext[a] / scale))
				wantH := int(math.Round(ext[d] / scale))
				if r.Dx() != wantW || r.Dy() != wantH {
					t.Errorf("%v panel is %d×%d pixels, want %d×%d (physical aspect %g)",
						sec, r.Dx(), r.Dy(), wantW, wantH, ext[d]/ext[a])
				}
				x0, x1 := nearestPixels(tt.voxel[a], tt.n[a], r.Dx())
				y0, y1 := nearestPixels(tt.voxel[d], tt.n[d], r.Dy())
				want := image.Rect(r.Min.X+x0, r.Min.Y+y0, r.Min.X+x1+1, r.Min.Y+y1+1)
				got, count := brightest(img, r)
				if got != want || count != want.Dx()*want.Dy() {
					t.Errorf("%v: brightest pixels %v (%d of them), want %v", sec, got, count, want)
				}
			}
			if lay.ScaleBar.Empty() {
				t.Error("no scale bar though the spacing is known")
			} else if bar := float64(lay.ScaleBar.Dx()) * lay.Scale; math.Abs(bar-lay.ScaleLength) > lay.Scale {
				t.Errorf("scale bar is %d pixels = %g um, labelled %g um", lay.ScaleBar.Dx(), bar, lay.ScaleLength)
			}
		})
	}
}

func TestUnknownSpacingHasNoScaleBar(t *testing.T) {
	m := newMem(16, 16, 16, [3]float64{}, "")
	s, err := ReadSections(m, Centre(m.h), nil)
	if err != nil {
		t.Fatal(err)
	}
	_, lay, err := Render([]*Sections{s}, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if !lay.ScaleBar.Empty() {
		t.Errorf("scale bar %v drawn for a stack of unknown spacing", lay.ScaleBar)
	}
	if got := lay.Panels[0][0].Dx(); got != DefaultMinWidth {
		t.Errorf("default width %d for a 16-voxel stack, want the minimum %d", got, DefaultMinWidth)
	}
}

func TestCompareSideBySide(t *testing.T) {
	h := [3]int{40, 30, 20}
	a := newMem(h[0], h[1], h[2], [3]float64{1, 1, 2}, "um")
	b := newMem(h[0], h[1], h[2], [3]float64{1, 1, 2}, "um")
	a.set(10, 10, 10, 500)
	b.set(10, 10, 10, 1000)
	at := [3]int{10, 10, 10}
	sa, _ := ReadSections(a, at, nil)
	sb, _ := ReadSections(b, at, nil)
	w := Window{0, 1000}
	img, lay, err := Render([]*Sections{sa, sb}, Options{Width: 120, Windows: []Window{w, w}, Titles: []string{"before", "after"}})
	if err != nil {
		t.Fatal(err)
	}
	for k := range lay.Panels[0] {
		ra, rb := lay.Panels[0][k], lay.Panels[1][k]
		if ra.Size() != rb.Size() || ra.Min.Y != rb.Min.Y || rb.Min.X <= ra.Max.X {
			t.Fatalf("panel %d: before %v, after %v: not side by side at the same size", k, ra, rb)
		}
		pa, _ := brightest(img, ra)
		pb, _ := brightest(img, rb)
		if pa.Sub(ra.Min) != pb.Sub(rb.Min) {
			t.Errorf("panel %d: bright voxel at %v before and %v after", k, pa.Sub(ra.Min), pb.Sub(rb.Min))
		}
		// The same window: 500 is half as bright as 1000 (give or take resampling).
		va, vb := float64(img.GrayAt(pa.Min.X, pa.Min.Y).Y), float64(img.GrayAt(pb.Min.X, pb.Min.Y).Y)
		if math.Abs(va/vb-0.5) > 0.02 {
			t.Errorf("panel %d: grey %v before, %v after; with one window want a ratio of 0.5", k, va, vb)
		}
	}
	c := newMem(h[0], h[1], h[2]+1, [3]float64{1, 1, 2}, "um")
	sc, _ := ReadSections(c, at, nil)
	if _, _, err := Render([]*Sections{sa, sc}, Options{}); err == nil {
		t.Error("stacks of different sizes compared without an error")
	}
}

func TestPhantomPreviewReadsOneSliceForXY(t *testing.T) {
	// The rock-core phantom seeks; an xy preview must not generate the whole stack.
	src := phantom.RockCore(64, 64, 400, [3]float64{6, 6, 10}, 3)
	counting := &countingSource{Source: src}
	s, err := ReadSections(counting, [3]int{32, 32, 399}, []Section{XY})
	if err != nil {
		t.Fatal(err)
	}
	if counting.reads != 1 {
		t.Errorf("read %d slices for one xy section, want 1", counting.reads)
	}
	w, err := ContrastWindow(s, 0.5, 99.5)
	if err != nil {
		t.Fatal(err)
	}
	// The phantom's air is about 1200 and its matrix 18000 (phantom.RockCore).
	if !(w.Lo < 5000 && w.Hi > 15000) {
		t.Errorf("window %+v does not span air to matrix", w)
	}
}

type countingSource struct {
	volume.Source
	reads int
}

func (c *countingSource) ReadSlice(dst *volume.Slice) error {
	c.reads++
	return c.Source.ReadSlice(dst)
}

func (c *countingSource) SeekSlice(z int) error {
	return c.Source.(volume.SliceSeeker).SeekSlice(z)
}

func ExampleRender() {
	// A 64×64×20 stack of 0.5×0.5×2 µm voxels: z is four times coarser than x and y.
	m := newMem(64, 64, 20, [3]float64{0.5, 0.5, 2}, "um")
	m.set(32, 32, 10, 1)
	s, err := ReadSections(m, Centre(m.Header()), nil)
	if err != nil {
		fmt.Println(err)
		return
	}
	_, lay, err := Render([]*Sections{s}, Options{Width: 256, Windows: []Window{{0, 1}}})
	if err != nil {
		fmt.Println(err)
		return
	}
	for k, r := range lay.Panels[0] {
		fmt.Printf("%v: %d×%d pixels\n", s.Planes[k].Section, r.Dx(), r.Dy())
	}
	fmt.Printf("%g µm per pixel, scale bar %g µm\n", lay.Scale, lay.ScaleLength)
	// Output:
	// xy: 256×256 pixels
	// xz: 256×320 pixels
	// yz: 256×320 pixels
	// 0.125 µm per pixel, scale bar 5 µm
}

// TestSelectKthAgreesWithSorting checks the selection on inputs that trouble quick
// selection: sorted, reversed, constant and few distinct values.
func TestSelectKthAgreesWithSorting(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	inputs := map[string]func(i, n int) float64{
		"random":   func(i, n int) float64 { return rng.NormFloat64() },
		"sorted":   func(i, n int) float64 { return float64(i) },
		"reversed": func(i, n int) float64 { return float64(n - i) },
		"constant": func(i, n int) float64 { return 7 },
		"three":    func(i, n int) float64 { return float64(rng.IntN(3)) },
	}
	for name, gen := range inputs {
		for _, n := range []int{1, 2, 3, 10, 1001} {
			v := make([]float64, n)
			for i := range v {
				v[i] = gen(i, n)
			}
			sorted := append([]float64(nil), v...)
			sort.Float64s(sorted)
			for _, k := range []int{0, n / 2, n - 1} {
				w := append([]float64(nil), v...)
				if got := selectKth(w, k); got != sorted[k] {
					t.Errorf("%s, n=%d: selectKth(%d) = %g, want %g", name, n, k, got, sorted[k])
				}
			}
		}
	}
}

// TestNaNIsDrawnBlack checks that NaN voxels (a float stack with holes) leave the
// contrast window alone and come out black.
func TestNaNIsDrawnBlack(t *testing.T) {
	m := newMem(8, 8, 8, [3]float64{1, 1, 1}, "um")
	for i := range m.v {
		m.v[i] = float32(100 + i%7)
	}
	nan := float32(math.NaN())
	for x := 0; x < 8; x++ {
		for y := 0; y < 8; y++ {
			m.set(x, y, 4, nan) // the whole centre slice
		}
	}
	s, err := ReadSections(m, [3]int{4, 4, 4}, nil)
	if err != nil {
		t.Fatal(err)
	}
	w, err := ContrastWindow(s, 0, 100)
	if err != nil || w.Lo != 100 || w.Hi != 106 {
		t.Fatalf("window %+v (%v), want 100 to 106 from the finite values", w, err)
	}
	img, lay, err := Render([]*Sections{s}, Options{Width: 64})
	if err != nil {
		t.Fatal(err)
	}
	xy := lay.Panels[0][0]
	for y := xy.Min.Y; y < xy.Max.Y; y++ {
		for x := xy.Min.X; x < xy.Max.X; x++ {
			if g := img.GrayAt(x, y).Y; g != 0 {
				t.Fatalf("NaN slice drawn with grey %d at (%d,%d), want black", g, x, y)
			}
		}
	}
}
