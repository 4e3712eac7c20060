package preview

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"path/filepath"
	"sort"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"

	"github.com/tripass/tripass/internal/atomicfile"
	"github.com/tripass/tripass/tensor"
)

// A KernelFigure is what a kernel plot shows.
type KernelFigure struct {
	// Title names the kernel (its file and size, say).
	Title string
	// ModeValues are the n-mode singular values along x, y and z, each descending.
	ModeValues [3][]float64
	// Candidates are the plans the planner tried.
	Candidates []Candidate
	// Tolerance, when positive, is drawn as a line on the error axis.
	Tolerance float64
}

// A Candidate is one plan: how it applies the kernel, its cost and its error.
type Candidate struct {
	Form       string // "direct", "cp" or "tucker": picks the mark
	Label      string // a few words, e.g. "tucker (9,1,9) yxz"
	Macs       int    // multiply-adds per output voxel
	RelError   float64
	Degenerate bool // a CP fit whose terms diverge and cancel: drawn hollow
	Chosen     bool
}

// Floor is the smallest value drawn on a log axis: an exact zero (a plan without
// error, a singular value of a low-rank kernel) is drawn at Floor, which is below the
// rounding error of float64 arithmetic on kernels of ordinary size.
const Floor = 1e-16

// FigureFromAnalysis fills a KernelFigure from the planner's analysis of a kernel.
func FigureFromAnalysis(a *tensor.Analysis, title string) *KernelFigure {
	f := &KernelFigure{Title: title, ModeValues: a.ModeSingularValues, Tolerance: a.Tolerance}
	for i := range a.Options {
		o := &a.Options[i]
		c := Candidate{Form: o.Form.String(), Macs: o.Macs, RelError: o.RelError,
			Degenerate: o.Degenerate, Chosen: o == a.Chosen}
		switch o.Form {
		case tensor.CP:
			c.Label = fmt.Sprintf("cp %d", o.Terms)
		case tensor.Tucker:
			c.Label = fmt.Sprintf("tucker (%d,%d,%d) %v", o.Ranks[0], o.Ranks[1], o.Ranks[2], o.Order)
		default:
			c.Label = "direct"
		}
		f.Candidates = append(f.Candidates, c)
	}
	return f
}

// Kernel plot size: two panels side by side, small enough for a README.
const (
	plotWidth  = 9 * vg.Inch
	plotHeight = 3.5 * vg.Inch
	plotDPI    = 96
)

// Colours of the three axes and of the three forms, from the palette of M. Okabe and
// K. Ito, "Color Universal Design (CUD): how to make figures and presentations that are
// friendly to colorblind people", J*Fly, 2008 (reference from memory), chosen to stay
// apart for readers with colour-vision deficiencies.
var (
	axisColours = [3]color.Color{
		color.RGBA{0, 114, 178, 255}, // x: blue
		color.RGBA{213, 94, 0, 255},  // y: vermilion
		color.RGBA{0, 158, 115, 255}, // z: bluish green
	}
	formStyle = map[string]struct {
		c     color.Color
		shape draw.GlyphDrawer
	}{
		"direct": {color.RGBA{80, 80, 80, 255}, draw.BoxGlyph{}},
		"cp":     {color.RGBA{204, 121, 167, 255}, draw.CircleGlyph{}},
		"tucker": {color.RGBA{230, 159, 0, 255}, draw.TriangleGlyph{}},
	}
)

// WriteKernelPlot draws f as a PNG to w: on the left the n-mode singular values of
// each axis, divided by the largest, on a log scale (a rank-one axis drops to the
// floor after its first value); on the right the relative error of each candidate plan
// against its cost in multiply-adds per voxel, both on log scales, with the plans that
// no other plan beats in both (the error-against-cost curve) joined by a line and the
// chosen plan ringed and named.
func WriteKernelPlot(w io.Writer, f *KernelFigure) error {
	left, err := spectrumPlot(f)
	if err != nil {
		return err
	}
	right, err := costPlot(f)
	if err != nil {
		return err
	}
	img := vgimg.NewWith(vgimg.UseWH(plotWidth, plotHeight), vgimg.UseDPI(plotDPI),
		vgimg.UseBackgroundColor(color.White))
	dc := draw.New(img)
	tiles := draw.Tiles{Rows: 1, Cols: 2, PadX: vg.Points(18), PadTop: vg.Points(6),
		PadBottom: vg.Points(4), PadLeft: vg.Points(4), PadRight: vg.Points(8)}
	canvases := plot.Align([][]*plot.Plot{{left, right}}, tiles, dc)
	left.Draw(canvases[0][0])
	right.Draw(canvases[0][1])
	_, err = vgimg.PngCanvas{Canvas: img}.WriteTo(w)
	return err
}

// KernelPlot writes the figure of analysis a to the PNG file path, atomically: the file
// appears only when complete. An existing file is replaced when overwrite is set.
func KernelPlot(a *tensor.Analysis, title, path string, overwrite bool) error {
	out, err := atomicfile.Create(path, overwrite)
	if err != nil {
		return err
	}
	if err := WriteKernelPlot(out, FigureFromAnalysis(a, title)); err != nil {
		out.Abort()
		return fmt.Errorf("%s: %w", path, err)
	}
	return out.Commit()
}

func floorLog(v float64) float64 {
	if !(v > Floor) {
		return Floor
	}
	return v
}

// newPlot returns a plot with the figure's text sizes and its legend inside the data
// area's upper right corner.
func newPlot() *plot.Plot {
	p := plot.New()
	p.Title.TextStyle.Font.Size = vg.Points(11)
	p.Legend.TextStyle.Font.Size = vg.Points(9)
	p.Legend.Top = true
	p.Legend.YOffs = -vg.Points(22)
	p.Legend.XOffs = -vg.Points(4)
	return p
}

func spectrumPlot(f *KernelFigure) (*plot.Plot, error) {
	p := newPlot()
	p.Title.Text = "n-mode singular values"
	if f.Title != "" {
		p.Title.Text += ": " + filepath.Base(f.Title)
	}
	p.X.Label.Text = "index"
	p.Y.Label.Text = "σ / σ₁ (log)"
	p.Y.Scale = plot.LogScale{}
	p.Y.Tick.Marker = decadeTicks{}
	p.X.Tick.Marker = integerTicks{}
	n := 0
	for axis, vals := range f.ModeValues {
		if len(vals) == 0 {
			continue
		}
		if vals[0] <= 0 || math.IsNaN(vals[0]) {
			return nil, fmt.Errorf("kernel plot: the %c-mode singular values start at %g; want a non-zero kernel", "xyz"[axis], vals[0])
		}
		xys := make(plotter.XYs, len(vals))
		for i, v := range vals {
			// Shifted a little apart, so that equal spectra (a symmetric kernel's)
			// stay visible side by side.
			xys[i] = plotter.XY{X: float64(i+1) + 0.08*float64(axis-1), Y: floorLog(v / vals[0])}
		}
		n = max(n, len(vals))
		line, points, err := plotter.NewLinePoints(xys)
		if err != nil {
			return nil, err
		}
		line.Color = axisColours[axis]
		line.Width = vg.Points(1.5)
		line.Dashes = [][]vg.Length{nil, {vg.Points(5), vg.Points(3)}, {vg.Points(1.5), vg.Points(2)}}[axis]
		points.Color = axisColours[axis]
		points.Shape = []draw.GlyphDrawer{draw.CircleGlyph{}, draw.SquareGlyph{}, draw.TriangleGlyph{}}[axis]
		points.Radius = vg.Points(2.5)
		p.Add(line, points)
		p.Legend.Add(fmt.Sprintf("%c", "xyz"[axis]), line, points)
	}
	if n == 0 {
		return nil, errors.New("kernel plot: no singular values")
	}
	p.X.Min, p.X.Max = 0.5, float64(n)+0.5
	p.Y.Min, p.Y.Max = Floor/2, 2
	p.Add(plotter.NewGrid())
	return p, nil
}

func costPlot(f *KernelFigure) (*plot.Plot, error) {
	if len(f.Candidates) == 0 {
		return nil, errors.New("kernel plot: no candidate plans")
	}
	p := newPlot()
	p.Title.Text = "relative error against cost of each plan"
	p.X.Label.Text = "multiply-adds per voxel (log)"
	p.Y.Label.Text = "relative error (log)"
	p.X.Scale, p.Y.Scale = plot.LogScale{}, plot.LogScale{}
	// Errors above 1 mean nothing: the room above 1 is for the legend, since
	// cheap plans sit upper left and exact ones lower right.
	p.X.Tick.Marker, p.Y.Tick.Marker = decadeTicks{}, decadeTicks{top: 1}
	p.Add(plotter.NewGrid())

	// The error-against-cost curve: sorted by cost, the plans that lower the error.
	cs := append([]Candidate(nil), f.Candidates...)
	sort.SliceStable(cs, func(i, j int) bool { return cs[i].Macs < cs[j].Macs })
	var front plotter.XYs
	best := math.Inf(1)
	minMacs, maxMacs := math.Inf(1), 0.0
	for _, c := range cs {
		x := math.Max(1, float64(c.Macs))
		minMacs, maxMacs = math.Min(minMacs, x), math.Max(maxMacs, x)
		if c.Degenerate {
			continue
		}
		if e := floorLog(c.RelError); e < best {
			best = e
			front = append(front, plotter.XY{X: x, Y: e})
		}
	}
	if len(front) > 1 {
		line, err := plotter.NewLine(front)
		if err != nil {
			return nil, err
		}
		line.Color = color.Gray{Y: 150}
		line.Width = vg.Points(1)
		p.Add(line)
		p.Legend.Add("best error for the cost", line)
	}
	for _, form := range []string{"direct", "cp", "tucker"} {
		for _, degenerate := range []bool{false, true} {
			var xys plotter.XYs
			for _, c := range cs {
				if c.Form == form && c.Degenerate == degenerate {
					xys = append(xys, plotter.XY{X: math.Max(1, float64(c.Macs)), Y: floorLog(c.RelError)})
				}
			}
			if len(xys) == 0 {
				continue
			}
			sc, err := plotter.NewScatter(xys)
			if err != nil {
				return nil, err
			}
			st := formStyle[form]
			sc.GlyphStyle = draw.GlyphStyle{Color: st.c, Shape: st.shape, Radius: vg.Points(3.5)}
			name := form
			if degenerate {
				sc.GlyphStyle.Shape = hollow(st.shape)
				name += " (degenerate)"
			}
			p.Add(sc)
			p.Legend.Add(name, sc)
		}
	}
	if f.Tolerance > 0 {
		tol, err := plotter.NewLine(plotter.XYs{{X: minMacs / 1.5, Y: f.Tolerance}, {X: maxMacs * 1.5, Y: f.Tolerance}})
		if err != nil {
			return nil, err
		}
		tol.Color = color.RGBA{200, 0, 0, 255}
		tol.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(tol)
		p.Legend.Add(fmt.Sprintf("tolerance %.0e", f.Tolerance), tol)
	}
	for _, c := range cs {
		if !c.Chosen {
			continue
		}
		xy := plotter.XY{X: math.Max(1, float64(c.Macs)), Y: floorLog(c.RelError)}
		ring, err := plotter.NewScatter(plotter.XYs{xy})
		if err != nil {
			return nil, err
		}
		ring.GlyphStyle = draw.GlyphStyle{Color: color.Black, Shape: draw.RingGlyph{}, Radius: vg.Points(7)}
		lab, err := plotter.NewLabels(plotter.XYLabels{XYs: plotter.XYs{xy},
			Labels: []string{fmt.Sprintf("chosen: %s, %d multiply-adds", c.Label, c.Macs)}})
		if err != nil {
			return nil, err
		}
		lab.Offset = vg.Point{X: vg.Points(9), Y: vg.Points(4)}
		p.Add(ring, lab)
	}
	p.X.Min, p.X.Max = minMacs/1.5, maxMacs*10
	p.Y.Min, p.Y.Max = Floor/2, 1e4
	return p, nil
}

// hollow returns the outline version of a filled glyph.
func hollow(g draw.GlyphDrawer) draw.GlyphDrawer {
	switch g.(type) {
	case draw.BoxGlyph:
		return draw.SquareGlyph{}
	case draw.TriangleGlyph:
		return draw.PyramidGlyph{}
	}
	return draw.RingGlyph{}
}

// decadeTicks marks every power of ten on a log axis and labels at most about eight of
// them ("1e-6"); a tick at Floor reads "≤1e-16", since exact zeros are drawn there.
// A positive top leaves the decades above it unmarked.
type decadeTicks struct{ top float64 }

func (d decadeTicks) Ticks(lo, hi float64) []plot.Tick {
	if d.top > 0 {
		hi = math.Min(hi, d.top)
	}
	a, b := int(math.Ceil(math.Log10(lo)-1e-9)), int(math.Floor(math.Log10(hi)+1e-9))
	step := max(1, (b-a+8)/8)
	var ts []plot.Tick
	for k := a; k <= b; k++ {
		t := plot.Tick{Value: math.Pow(10, float64(k))}
		if (b-k)%step == 0 {
			if k >= 0 && k <= 4 {
				t.Label = strconv.Itoa(int(t.Value)) // 1 to 10000 read best in full
			} else {
				t.Label = fmt.Sprintf("1e%d", k)
			}
		}
		if t.Value <= Floor*(1+1e-9) {
			t.Label = "≤1e-16"
		}
		ts = append(ts, t)
	}
	return ts
}

// integerTicks marks whole numbers on an index axis, about ten of them.
type integerTicks struct{}

func (integerTicks) Ticks(lo, hi float64) []plot.Tick {
	a, b := int(math.Ceil(lo)), int(math.Floor(hi))
	step := max(1, (b-a+1)/10)
	var ts []plot.Tick
	for i := a; i <= b; i++ {
		t := plot.Tick{Value: float64(i)}
		if (i-a)%step == 0 {
			t.Label = fmt.Sprint(i)
		}
		ts = append(ts, t)
	}
	return ts
}
