package plot_test

import (
	"bytes"
	"context"
	"encoding/xml"
	"errors"
	"github.com/rhomb/rhomb/internal/demorun"
	"image"
	"image/color"
	"image/png"
	"math"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"

	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
	"github.com/rhomb/rhomb/optim/gauge/report"
)

var (
	demoOnce sync.Once
	demoRun  *report.Run
	demoErr  error
)

// demo is a short real run on the demo data (invented data: fine for
// properties that hold for any run, which is all these tests check).
func demo(t *testing.T) *report.Run {
	t.Helper()
	demoOnce.Do(func() { demoRun, demoErr = demorun.Run(context.Background(), demorun.Options{Epochs: 8}) })
	if demoErr != nil {
		t.Fatal(demoErr)
	}
	return demoRun
}

func options(r *report.Run) plot.Options {
	return plot.Options{Heldout: r.Heldout, HeldoutLoss: r.HeldoutLoss, Start: r.Start}
}

// Every figure is made from a run that measured everything, in the
// documented order, and its PNG decodes (with the standard library's
// decoder, not the encoder's own code) to the size the nominal size and
// DPI give: pixels = inches × DPI, rounded, with 2.54 cm to the inch (the
// definition of the inch).
func TestAllFiguresPNG(t *testing.T) {
	r := demo(t)
	figs, err := plot.All(r.History, options(r))
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, f := range figs {
		names = append(names, f.Name)
	}
	want := []string{"error", "loss", "scale", "margins", "histogram", "collapse", "spectra"}
	if !slices.Equal(names, want) {
		t.Fatalf("figures %v; want %v", names, want)
	}
	for _, f := range figs {
		b, err := f.Bytes(plot.PNG)
		if err != nil {
			t.Fatalf("%s: %v", f.Name, err)
		}
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatalf("%s: the PNG does not decode: %v", f.Name, err)
		}
		inW, inH := float64(f.Width)/72, float64(f.Height)/72 // vg lengths are points, 72 to the inch
		wantW, wantH := int(math.Round(inW*plot.DPI)), int(math.Round(inH*plot.DPI))
		if got := img.Bounds().Size(); got.X != wantW || got.Y != wantH {
			t.Errorf("%s: PNG is %v; want %d×%d", f.Name, got, wantW, wantH)
		}
		cw, ch := f.PixelSize()
		if cw != int(math.Round(inW*96)) || ch != int(math.Round(inH*96)) {
			t.Errorf("%s: PixelSize %d×%d; want %.0f×%.0f at 96 per inch", f.Name, cw, ch, inW*96, inH*96)
		}
		if f.Title == "" || f.Caption == "" {
			t.Errorf("%s: no title or caption", f.Name)
		}
	}
}

// The panel of a single-panel figure at 16 cm is about 1,200 pixels wide
// at 192 DPI, and every curve of the error figure spans the epochs from
// the first to the last, so each line colour covers at least one pixel in
// most columns of the data area; 300 exact-colour pixels is a floor far
// below that (anti-aliasing only touches the line's edges, and the line is
// 1.6 pt = 4.3 pixels wide). A figure whose curves were not drawn has
// none: the check fails on a blank or wrongly styled figure.
func TestErrorFigureDrawsBothCurves(t *testing.T) {
	r := demo(t)
	f, err := plot.Error(r.History, options(r))
	if err != nil {
		t.Fatal(err)
	}
	b, err := f.Bytes(plot.PNG)
	if err != nil {
		t.Fatal(err)
	}
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	blue := color.RGBA{0, 114, 178, 255}     // training (Okabe–Ito blue)
	vermilion := color.RGBA{213, 94, 0, 255} // held-out
	for _, c := range []color.RGBA{blue, vermilion} {
		n := countColour(img, c)
		t.Logf("%v: %d pixels", c, n)
		if n < 300 {
			t.Errorf("only %d pixels of %v: a curve is missing", n, c)
		}
	}
}

func countColour(img image.Image, c color.RGBA) int {
	n := 0
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			r, g, bl, a := img.At(x, y).RGBA()
			if uint8(r>>8) == c.R && uint8(g>>8) == c.G && uint8(bl>>8) == c.B && uint8(a>>8) == 255 {
				n++
			}
		}
	}
	return n
}

// The SVG output is well-formed XML (encoding/xml, strict), its root is
// an <svg> of the nominal size in points, and it carries the axis labels
// as text.
func TestSVG(t *testing.T) {
	r := demo(t)
	f, err := plot.Margins(r.History, options(r))
	if err != nil {
		t.Fatal(err)
	}
	b, err := f.Bytes(plot.SVG)
	if err != nil {
		t.Fatal(err)
	}
	d := xml.NewDecoder(bytes.NewReader(b))
	var root *xml.StartElement
	var text strings.Builder
	for {
		tok, err := d.Token()
		if err != nil {
			if err.Error() == "EOF" {
				break
			}
			t.Fatalf("SVG does not parse: %v", err)
		}
		switch tk := tok.(type) {
		case xml.StartElement:
			if root == nil {
				e := tk.Copy()
				root = &e
			}
		case xml.CharData:
			text.Write(tk)
		}
	}
	if root == nil || root.Name.Local != "svg" {
		t.Fatalf("root element %v; want svg", root)
	}
	for _, a := range root.Attr {
		want := map[string]float64{"width": float64(f.Width), "height": float64(f.Height)}[a.Name.Local]
		if want == 0 {
			continue
		}
		got, err := strconv.ParseFloat(strings.TrimSuffix(a.Value, "pt"), 64)
		// vgsvg prints lengths with a few significant digits: allow the
		// last one.
		if err != nil || math.Abs(got-want) > 0.01*want {
			t.Errorf("svg %s = %q; want %.4gpt", a.Name.Local, a.Value, want)
		}
	}
	for _, s := range []string{"epochs completed", "margin (output units, ρ = 1)"} {
		if !strings.Contains(text.String(), s) {
			t.Errorf("SVG text lacks %q", s)
		}
	}
}

// A History without the measures a figure needs gives *ErrNoData for it,
// and All leaves it out rather than drawing an empty frame.
func TestNoData(t *testing.T) {
	h := &gauge.History{Epochs: []gauge.Record{{Epoch: 0, Steps: 10, Loss: 0.5, Rho: 1, RhoStarMean: 1.2, TrainError: math.NaN(), TestError: math.NaN()}}}
	figs, err := plot.All(h, plot.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, f := range figs {
		names = append(names, f.Name)
	}
	// Loss and scale need only the trainer's values; the rest need
	// whole-set measures that were not taken.
	if want := []string{"loss", "scale"}; !slices.Equal(names, want) {
		t.Errorf("figures %v; want %v", names, want)
	}
	_, err = plot.Collapse(h, plot.Options{})
	var nd *plot.ErrNoData
	if !errors.As(err, &nd) || nd.Figure != "collapse" {
		t.Errorf("Collapse on a history without it: %v; want *ErrNoData for collapse", err)
	}
	if _, err := plot.Loss(h, plot.Options{HeldoutLoss: []float64{1, 2}}); err == nil {
		t.Error("Loss accepted 2 held-out losses for 1 epoch")
	}
	if err := figs[0].Encode(&bytes.Buffer{}, "gif"); err == nil {
		t.Error("Encode accepted format gif")
	}
}
