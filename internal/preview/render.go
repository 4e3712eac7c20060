package preview

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"math"
	"strings"
	"sync"

	"codeberg.org/go-fonts/liberation/liberationsansregular"
	"golang.org/x/image/font"
	"golang.org/x/image/font/opentype"
	"golang.org/x/image/math/fixed"

	"github.com/tripass/tripass/volume"
)

// Options say how Render draws.
type Options struct {
	// Width is the width in pixels of each stack's column of panels: the widest
	// section spans it. Zero picks one pixel per finest voxel spacing, kept between
	// DefaultMinWidth and DefaultMaxWidth.
	Width int
	// Windows holds the contrast window of each stack, in order; a missing one is
	// computed from that stack's own sections with the percentiles below.
	Windows []Window
	// Percentiles are the low and high percentiles of a computed window (0 and 0
	// mean 0.5 and 99.5) and are printed under each column.
	Percentiles [2]float64
	// Titles are printed above the columns, one per stack (e.g. the file names).
	Titles []string
	// Notes follow each column's grey window in the line under it ("(as before.tif)").
	Notes []string
}

// Limits of the automatic width and of the whole image.
const (
	DefaultMinWidth = 256
	DefaultMaxWidth = 768
	// MaxPixels bounds the image (64 Mpixel): a very deep stack drawn wide would
	// otherwise ask for an image nobody can open.
	MaxPixels = 1 << 26
)

// Layout says where Render put everything, in image pixels.
type Layout struct {
	// Scale is the physical length of one pixel side, in Unit.
	Scale float64
	// Unit is the stacks' length unit ("um", "mm", ...; "" when the spacing is
	// unknown and lengths are in voxels).
	Unit string
	// Panels[i][k] is the rectangle of stack i's k-th section (in the order of its
	// Planes). A section of n voxels of spacing s spans round(n·s/Scale) pixels.
	Panels [][]image.Rectangle
	// ScaleBar is the bar's rectangle (empty without a known unit) and ScaleLength
	// its length in Unit.
	ScaleBar    image.Rectangle
	ScaleLength float64
}

// Grey levels of the picture's furniture.
var (
	background = color.Gray{Y: 28}
	ink        = color.Gray{Y: 220}
)

// Spacing of the furniture, in pixels.
const (
	margin   = 10 // around the image and between columns
	gap      = 8  // between a panel and the next label
	textLine = 16 // height of a line of text (the face is 12 px)
)

// Render draws the sections of one or more stacks (one column each, sections one above
// the other) and returns the image and where things are in it. Every stack must have
// the same size in voxels; all share one pixel scale, set by the first stack's
// physical extent and opt.Width.
func Render(stacks []*Sections, opt Options) (*image.Gray, *Layout, error) {
	if len(stacks) == 0 {
		return nil, nil, errors.New("preview: nothing to render")
	}
	h0 := stacks[0].Header
	for i, s := range stacks[1:] {
		h := s.Header
		if h.NX != h0.NX || h.NY != h0.NY || h.NZ != h0.NZ {
			return nil, nil, fmt.Errorf("stack %d is %d×%d×%d voxels, the first %d×%d×%d: compared stacks must have the same size",
				i+2, h.NX, h.NY, h.NZ, h0.NX, h0.NY, h0.NZ)
		}
	}
	pl, ph := opt.Percentiles[0], opt.Percentiles[1]
	if pl == 0 && ph == 0 {
		pl, ph = 0.5, 99.5
	}
	windows := make([]Window, len(stacks))
	for i, s := range stacks {
		if i < len(opt.Windows) {
			windows[i] = opt.Windows[i]
			continue
		}
		w, err := ContrastWindow(s, pl, ph)
		if err != nil {
			return nil, nil, err
		}
		windows[i] = w
	}

	// One pixel scale for everything: the column's widest section spans Width.
	sp := h0.Spacing
	colPhys := 0.0
	for _, p := range stacks[0].Planes {
		a, _, _ := p.Section.Axes()
		colPhys = math.Max(colPhys, float64(p.W)*sp[a])
	}
	width := opt.Width
	if width <= 0 {
		fine := math.Min(sp[0], math.Min(sp[1], sp[2]))
		width = int(math.Round(colPhys / fine))
		width = max(DefaultMinWidth, min(DefaultMaxWidth, width))
	}
	lay := &Layout{Scale: colPhys / float64(width), Unit: h0.Unit}

	face := labelFace()
	titleH := 0
	if len(opt.Titles) > 0 {
		titleH = textLine + 4
	}
	// Lay out one column; every column has the same geometry.
	type box struct{ w, h, y int }
	var boxes []box
	y := margin + titleH
	for _, p := range stacks[0].Planes {
		a, d, _ := p.Section.Axes()
		w := max(1, int(math.Round(float64(p.W)*sp[a]/lay.Scale)))
		hh := max(1, int(math.Round(float64(p.H)*sp[d]/lay.Scale)))
		y += textLine
		boxes = append(boxes, box{w, hh, y})
		y += hh + gap
	}
	footerY := y
	y += textLine // contrast line under each column
	barY := y + 4
	if h0.Unit != "" {
		y += textLine + 8
	}
	height := y + margin
	colW := width
	for i := range stacks {
		// Room for the longest line of text under or above the column.
		colW = max(colW, textWidth(face, windowText(windows[i], pl, ph, i < len(opt.Windows), note(opt.Notes, i))))
	}
	total := margin + len(stacks)*(colW+margin)
	if int64(total)*int64(height) > MaxPixels {
		return nil, nil, fmt.Errorf("the preview would be %d×%d pixels; choose a smaller width", total, height)
	}

	img := image.NewGray(image.Rect(0, 0, total, height))
	draw.Draw(img, img.Bounds(), image.NewUniform(background), image.Point{}, draw.Src)
	for i, s := range stacks {
		x0 := margin + i*(colW+margin)
		if i < len(opt.Titles) {
			drawText(img, face, x0, margin+12, fit(face, opt.Titles[i], colW))
		}
		var rects []image.Rectangle
		for k, p := range s.Planes {
			b := boxes[k]
			_, _, normal := p.Section.Axes()
			drawText(img, face, x0, b.y-4, fmt.Sprintf("%v at %c = %d", p.Section, "xyz"[normal], s.At[normal]))
			r := image.Rect(x0, b.y, x0+b.w, b.y+b.h)
			renderPlane(img, r, p, windows[i])
			drawCuts(img, r, p, s)
			rects = append(rects, r)
		}
		lay.Panels = append(lay.Panels, rects)
		drawText(img, face, x0, footerY+12, windowText(windows[i], pl, ph, i < len(opt.Windows), note(opt.Notes, i)))
	}
	if h0.Unit != "" {
		L := niceLength(colPhys / 4)
		px := int(math.Round(L / lay.Scale))
		lay.ScaleLength = L
		lay.ScaleBar = image.Rect(margin, barY+5, margin+px, barY+10)
		draw.Draw(img, lay.ScaleBar, image.NewUniform(ink), image.Point{}, draw.Src)
		drawText(img, face, margin+px+8, barY+12, lengthLabel(L, h0.Unit))
	}
	return img, lay, nil
}

func note(notes []string, i int) string {
	if i < len(notes) {
		return notes[i]
	}
	return ""
}

// windowText describes a contrast window under a column.
func windowText(w Window, lo, hi float64, given bool, note string) string {
	s := fmt.Sprintf("grey %s to %s", short(w.Lo), short(w.Hi))
	if !given {
		s += fmt.Sprintf(" (%s–%s percentile)", short(lo), short(hi))
	}
	if note != "" {
		s += " " + note
	}
	return s
}

// short formats v with about four significant digits, in plain notation between
// 0.001 and a million ("37290", "5.075", "0.0123") and in e-notation beyond.
func short(v float64) string {
	a := math.Abs(v)
	if a != 0 && (a < 1e-3 || a >= 1e6) {
		return fmt.Sprintf("%.3g", v)
	}
	dec := 0
	if a > 0 {
		dec = max(0, 3-int(math.Floor(math.Log10(a))))
	}
	s := fmt.Sprintf("%.*f", dec, v)
	if strings.Contains(s, ".") {
		s = strings.TrimRight(strings.TrimRight(s, "0"), ".")
	}
	if s == "-0" {
		s = "0"
	}
	return s
}

// tick is the length in pixels of the marks beside a panel that show where the other
// two sections cut it.
const tick = 5

// drawCuts marks, outside panel r of plane p, the column and the row where the other
// sections of s pass: below the panel for the column, left of it for the row.
func drawCuts(img *image.Gray, r image.Rectangle, p *Plane, s *Sections) {
	a, d, _ := p.Section.Axes()
	c := s.At[a]
	x := r.Min.X + int((float64(c)+0.5)*float64(r.Dx())/float64(p.W))
	y := r.Min.Y + int((float64(s.At[d])+0.5)*float64(r.Dy())/float64(p.H))
	u := image.NewUniform(ink)
	draw.Draw(img, image.Rect(x, r.Max.Y+1, x+1, r.Max.Y+1+tick), u, image.Point{}, draw.Src)
	draw.Draw(img, image.Rect(r.Min.X-1-tick, y, r.Min.X-1, y+1), u, image.Point{}, draw.Src)
}

// renderPlane resamples p into r of img through window w.
func renderPlane(img *image.Gray, r image.Rectangle, p *Plane, w Window) {
	ox, oy := r.Dx(), r.Dy()
	cols := tentWeights(p.W, ox)
	rows := tentWeights(p.H, oy)
	// Across first: each input row to ox values; then down.
	tmp := make([]float32, p.H*ox)
	for j := 0; j < p.H; j++ {
		in := p.Pix[j*p.W : (j+1)*p.W]
		out := tmp[j*ox : (j+1)*ox]
		for i := range out {
			out[i] = cols.apply(i, in, float32(w.Lo))
		}
	}
	col := make([]float32, p.H)
	scale := 255 / (w.Hi - w.Lo)
	for i := 0; i < ox; i++ {
		for j := range col {
			col[j] = tmp[j*ox+i]
		}
		for j := 0; j < oy; j++ {
			v := float64(rows.apply(j, col, float32(w.Lo)))
			g := math.Round((v - w.Lo) * scale)
			g = math.Max(0, math.Min(255, g))
			img.Pix[img.PixOffset(r.Min.X+i, r.Min.Y+j)] = uint8(g)
		}
	}
}

// weights holds, for each output sample, the first input index and the normalised
// weights of the inputs from there on.
type weights struct {
	start []int
	w     [][]float32
}

// tentWeights resamples n input samples to m output samples covering the same length,
// with a triangle (linear interpolation) filter widened to the input spacing of one
// output sample when shrinking, so that no input voxel is skipped (common practice in
// image resizing). Sample centres sit at (k+0.5) times their spacing.
func tentWeights(n, m int) weights {
	ws := weights{start: make([]int, m), w: make([][]float32, m)}
	step := float64(n) / float64(m) // input samples per output sample
	r := math.Max(1, step)          // filter half-width in input samples
	for i := 0; i < m; i++ {
		u := (float64(i)+0.5)*step - 0.5
		a := max(0, int(math.Ceil(u-r)))
		b := min(n-1, int(math.Floor(u+r)))
		var row []float32
		sum := 0.0
		for k := a; k <= b; k++ {
			t := math.Max(0, 1-math.Abs(float64(k)-u)/r)
			row = append(row, float32(t))
			sum += t
		}
		for k := range row {
			row[k] = float32(float64(row[k]) / sum)
		}
		ws.start[i], ws.w[i] = a, row
	}
	return ws
}

// apply returns output sample i from in; NaN inputs count as nan.
func (ws weights) apply(i int, in []float32, nan float32) float32 {
	a := ws.start[i]
	var s float32
	for k, t := range ws.w[i] {
		v := in[a+k]
		if v != v {
			v = nan
		}
		s += t * v
	}
	return s
}

// niceLength returns the largest length of the form 1, 2 or 5 × 10^k not above
// target (common practice for scale bars).
func niceLength(target float64) float64 {
	if !(target > 0) {
		return 1
	}
	p := math.Pow(10, math.Floor(math.Log10(target)))
	for _, m := range []float64{5, 2, 1} {
		if m*p <= target*(1+1e-9) {
			return m * p
		}
	}
	return p
}

// lengthLabel writes a length given in unit in the metric unit that puts its number
// between 1 and 1000 ("500 µm", "2 mm").
func lengthLabel(v float64, unit string) string {
	um, err := volume.ConvertLength(v, unit, "um")
	if err != nil {
		return short(v) + " " + unit
	}
	switch {
	case um < 1:
		return short(um*1e3) + " nm"
	case um < 1e3:
		return short(um) + " µm"
	case um < 1e6:
		return short(um/1e3) + " mm"
	}
	return short(um/1e6) + " m"
}

var (
	faceOnce sync.Once
	face12   font.Face
)

// labelFace is Liberation Sans at 12 px (it has the µ that basicfont lacks).
func labelFace() font.Face {
	faceOnce.Do(func() {
		f, err := opentype.Parse(liberationsansregular.TTF)
		if err != nil {
			panic("preview: embedded font: " + err.Error())
		}
		face12, err = opentype.NewFace(f, &opentype.FaceOptions{Size: 12, DPI: 72, Hinting: font.HintingFull})
		if err != nil {
			panic("preview: embedded font: " + err.Error())
		}
	})
	return face12
}

func drawText(img draw.Image, face font.Face, x, baseline int, s string) {
	d := font.Drawer{Dst: img, Src: image.NewUniform(ink), Face: face, Dot: fixed.P(x, baseline)}
	d.DrawString(s)
}

func textWidth(face font.Face, s string) int {
	return font.MeasureString(face, s).Ceil()
}

// fit shortens s from the left with an ellipsis until it fits in w pixels.
func fit(face font.Face, s string, w int) string {
	if textWidth(face, s) <= w {
		return s
	}
	r := []rune(s)
	for len(r) > 1 {
		r = r[1:]
		if t := "…" + string(r); textWidth(face, t) <= w {
			return t
		}
	}
	return s
}
