package plot

import (
	"bytes"
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
	"gonum.org/v1/plot/vg/vgsvg"
)

// Format is an image format a Figure encodes to.
type Format string

// The formats: PNG for pages and READMEs, SVG for print and zooming.
const (
	PNG Format = "png"
	SVG Format = "svg"
)

// DPI is the resolution of PNG output: twice the 96 pixels per inch that
// browsers lay out in, so that figures stay sharp on high-density screens
// when a page shows them at their nominal size.
const DPI = 192

// Figure is one picture of a run: one or more panels side by side, made
// with gonum.org/v1/plot. Panels are exported so that a caller can restyle
// them before encoding.
type Figure struct {
	// Name is a short file-name stem, stable across versions ("error",
	// "scale", ...): reports and READMEs refer to figures by it.
	Name string
	// Title says what the figure shows; Caption, one or two sentences, what
	// to look for in it.
	Title, Caption string
	// Width and Height are the figure's nominal size.
	Width, Height vg.Length
	Panels        []*gplot.Plot
}

// Encode writes the figure at its nominal size in the given format.
func (f *Figure) Encode(w io.Writer, format Format) error {
	if len(f.Panels) == 0 {
		return fmt.Errorf("plot: figure %q has no panels", f.Name)
	}
	var c interface {
		vg.CanvasSizer
		io.WriterTo
	}
	switch format {
	case PNG:
		img := vgimg.NewWith(vgimg.UseWH(f.Width, f.Height), vgimg.UseDPI(DPI), vgimg.UseBackgroundColor(color.White))
		c = vgimg.PngCanvas{Canvas: img}
	case SVG:
		// Fonts are embedded so that the file looks the same on a
		// machine without Liberation installed.
		c = vgsvg.NewWith(vgsvg.UseWH(f.Width, f.Height), vgsvg.EmbedFonts(true))
	default:
		return fmt.Errorf("plot: format %q; want %q or %q", format, PNG, SVG)
	}
	dc := draw.New(c)
	if len(f.Panels) == 1 {
		f.Panels[0].Draw(dc)
	} else {
		tiles := draw.Tiles{Rows: 1, Cols: len(f.Panels), PadX: vg.Millimeter * 4, PadTop: vg.Millimeter, PadBottom: vg.Millimeter, PadLeft: vg.Millimeter, PadRight: vg.Millimeter * 2}
		row := [][]*gplot.Plot{f.Panels}
		canvases := gplot.Align(row, tiles, dc)
		for i, p := range f.Panels {
			p.Draw(canvases[0][i])
		}
	}
	_, err := c.WriteTo(w)
	return err
}

// Bytes returns the encoded figure.
func (f *Figure) Bytes(format Format) ([]byte, error) {
	var b bytes.Buffer
	if err := f.Encode(&b, format); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

// Save writes the figure to dir/Name.png or dir/Name.svg and returns the
// path.
func (f *Figure) Save(dir string, format Format) (string, error) {
	b, err := f.Bytes(format)
	if err != nil {
		return "", err
	}
	path := filepath.Join(dir, f.Name+"."+string(format))
	return path, os.WriteFile(path, b, 0o644)
}

// PixelSize is the size in CSS pixels (96 per inch) at which a page shows
// the figure at its nominal size; the PNG holds DPI/96 times as many.
func (f *Figure) PixelSize() (w, h int) {
	return int(math.Round(float64(f.Width/vg.Inch) * 96)), int(math.Round(float64(f.Height/vg.Inch) * 96))
}

// Nominal sizes: one panel is 16 cm × 9 cm, about 600 × 340 CSS pixels,
// which fits a laptop screen beside nothing else and a README column.
const (
	panelWidth  = 16 * vg.Centimeter
	panelHeight = 9 * vg.Centimeter
)

// errNoData is returned by a figure builder when the History holds nothing
// the figure could show.
var errNoData = errors.New("no data")

// ErrNoData reports that the History lacks what a figure needs (a measure
// that was not asked for, or a run with no epochs), or that a figure drawn
// from other data (Reliability) was given none; All skips such figures.
type ErrNoData struct {
	Figure string // the figure's Name
	Need   string // what was missing, in the words of gauge.RecorderOptions
	// In names what lacked it; empty means "the history".
	In string
}

func (e *ErrNoData) Error() string {
	in := e.In
	if in == "" {
		in = "the history"
	}
	return fmt.Sprintf("plot: figure %q: %s has no %s", e.Figure, in, e.Need)
}

func (e *ErrNoData) Unwrap() error { return errNoData }

// The palette: the Okabe–Ito colours, chosen to stay distinguishable
// under the common forms of colour blindness (Okabe and Ito, "Color
// Universal Design", 2002; values from memory).
var palette = []color.Color{
	color.RGBA{0, 114, 178, 255},   // blue
	color.RGBA{213, 94, 0, 255},    // vermilion
	color.RGBA{0, 158, 115, 255},   // bluish green
	color.RGBA{204, 121, 167, 255}, // reddish purple
	color.RGBA{230, 159, 0, 255},   // orange
	color.RGBA{86, 180, 233, 255},  // sky blue
	color.RGBA{0, 0, 0, 255},       // black
}

var grey = color.Gray{Y: 150}

// newPanel returns a panel with rhomb's typography: sans-serif, large
// enough to read when the figure is shown at half its nominal width.
func newPanel(title, x, y string) *gplot.Plot {
	p := gplot.New()
	sans := font.Font{Typeface: "Liberation", Variant: "Sans"}
	set := func(s *font.Font, size vg.Length) {
		*s = sans
		s.Size = size
	}
	p.Title.Text = title
	set(&p.Title.TextStyle.Font, 14)
	p.Title.Padding = vg.Millimeter * 2
	p.X.Label.Text, p.Y.Label.Text = x, y
	set(&p.X.Label.TextStyle.Font, 12)
	set(&p.Y.Label.TextStyle.Font, 12)
	set(&p.X.Tick.Label.Font, 11)
	set(&p.Y.Tick.Label.Font, 11)
	set(&p.Legend.TextStyle.Font, 11)
	p.Legend.Top = true
	p.Add(plotter.NewGrid())
	if x == epochAxis {
		p.X.Min = 0 // ticks at round epochs
	}
	return p
}

// line adds a polyline of the finite points of xs, ys (NaN and ±Inf,
// which mean "not measured", are left out) and its legend entry. dashed
// draws it dashed; it returns false when no point was finite.
func line(p *gplot.Plot, name string, xs, ys []float64, c color.Color, dashed bool) (bool, error) {
	pts := make(plotter.XYs, 0, len(xs))
	for i := range xs {
		if finite(xs[i]) && finite(ys[i]) {
			pts = append(pts, plotter.XY{X: xs[i], Y: ys[i]})
		}
	}
	if len(pts) == 0 {
		return false, nil
	}
	l, err := plotter.NewLine(pts)
	if err != nil {
		return false, err
	}
	l.Color = c
	l.Width = vg.Points(1.6)
	if dashed {
		l.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
	}
	p.Add(l)
	if len(pts) < 12 { // few points: mark them, a line alone hides how few
		s, err := plotter.NewScatter(pts)
		if err != nil {
			return false, err
		}
		s.Color = c
		s.Radius = vg.Points(2)
		p.Add(s)
	}
	if name != "" {
		p.Legend.Add(name, l)
	}
	return true, nil
}

// hline adds a thin grey horizontal reference line at y, across the data.
func hline(p *gplot.Plot, y float64, name string) {
	h := plotter.NewFunction(func(float64) float64 { return y })
	h.Color = grey
	h.Width = vg.Points(1)
	h.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
	p.Add(h)
	if name != "" {
		p.Legend.Add(name, h)
	}
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// logY puts the y axis on a log scale when every finite value in ys is
// positive and they span more than a decade, and reports whether it did;
// the caller then plots log10 of its values (toLog). Values spanning
// decades (losses, the collapse measures) are unreadable on a linear axis.
//
// The axis stays linear in log10 units with ticks labelled by powers of
// ten, rather than gonum's LogScale: with that, the plot pads for the
// y label as if it sat at the arithmetic mean of the range, which on a
// log axis is near the top, and leaves a blank band above the curves.
func logY(p *gplot.Plot, ys ...[]float64) bool {
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range ys {
		for _, v := range s {
			if finite(v) {
				lo, hi = min(lo, v), max(hi, v)
			}
		}
	}
	if !(lo > 0) || !(hi/lo > 10) {
		return false
	}
	p.Y.Tick.Marker = decades{}
	return true
}

// toLog returns log10 of every value (NaN stays NaN: not measured).
func toLog(v []float64) []float64 {
	out := make([]float64, len(v))
	for i, x := range v {
		out[i] = math.Log10(x)
	}
	return out
}

// decades ticks an axis whose values are log10 of the data: a labelled
// tick at every power of ten, unlabelled ones at 2 to 9 times it.
type decades struct{}

func (decades) Ticks(lo, hi float64) []gplot.Tick {
	var out []gplot.Tick
	for k := math.Floor(lo); k <= math.Ceil(hi); k++ {
		for m := 1.0; m <= 9; m++ {
			v := k + math.Log10(m)
			// k + log10(m) and log10(k·m) differ in the last bits: a
			// tick within 1e-9 decades of an end is at that end.
			if v < lo-1e-9 || v > hi+1e-9 {
				continue
			}
			t := gplot.Tick{Value: v}
			if m == 1 {
				t.Label = strconv.FormatFloat(math.Pow(10, k), 'g', -1, 64)
			}
			out = append(out, t)
		}
	}
	return out
}
