package plot_test

import (
	"bytes"
	"encoding/xml"
	"errors"
	"image/png"
	"io"
	"math"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/calib"
	"github.com/rhomb/rhomb/optim/gauge/plot"
)

// A worked example, by hand. Five equal bins on [0, 1]; 60 rows:
//
//	bin [0.4, 0.6): 10 rows, mean probability 0.55, 6 right  → accuracy 0.6
//	bin [0.6, 0.8): 10 rows, mean probability 0.7,  6 right  → accuracy 0.6
//	bin [0.8, 1]:   40 rows, mean probability 0.9, 34 right  → accuracy 0.85
//
// ECE = (10·|0.6 − 0.55| + 10·|0.6 − 0.7| + 40·|0.85 − 0.9|)/60
//
//	= (0.5 + 1 + 2)/60 = 3.5/60 = 0.058333…, printed 0.05833.
//
// The uncalibrated map on the same rows puts 10 rows at 0.7 (6 right) and
// 50 at 0.95 (40 right, accuracy 0.8):
//
//	ECE = (10·0.1 + 50·0.15)/60 = 8.5/60 = 0.141666…, printed 0.1417.
var (
	handBins = []plot.ReliabilityBin{
		{Lo: 0, Hi: 0.2}, {Lo: 0.2, Hi: 0.4},
		{Lo: 0.4, Hi: 0.6, Rows: 10, Confidence: 0.55, Accuracy: 0.6},
		{Lo: 0.6, Hi: 0.8, Rows: 10, Confidence: 0.7, Accuracy: 0.6},
		{Lo: 0.8, Hi: 1, Rows: 40, Confidence: 0.9, Accuracy: 0.85},
	}
	handRaw = []plot.ReliabilityBin{
		{Lo: 0, Hi: 0.2}, {Lo: 0.2, Hi: 0.4}, {Lo: 0.4, Hi: 0.6},
		{Lo: 0.6, Hi: 0.8, Rows: 10, Confidence: 0.7, Accuracy: 0.6},
		{Lo: 0.8, Hi: 1, Rows: 50, Confidence: 0.95, Accuracy: 0.8},
	}
)

// point is a drawn marker: its centre in data units and its radius in
// points.
type point struct{ x, y, r float64 }

// markers returns the scatter markers a panel draws, read back through
// gonum's public Plot.GlyphBoxes: every plotter reports a box per point
// it draws, at the point's position normalized to its axes (Axis.Norm:
// (v − Min)/(Max − Min), undone here). Markers are the boxes centred on
// their point (−r to +r on both axes) with r at least 2 pt; the lines'
// boxes are half their width (at most 0.8 pt here) and the labels' boxes
// are offset to the right of their point.
func markers(t *testing.T, f *plot.Figure) []point {
	t.Helper()
	if len(f.Panels) != 1 {
		t.Fatalf("%d panels; want 1", len(f.Panels))
	}
	p := f.Panels[0]
	if p.X.Min != 0 || p.X.Max != 1 || p.Y.Min != 0 || p.Y.Max < 1 {
		t.Fatalf("axes [%v, %v] × [%v, %v]; want [0, 1] × [0, 1 or more]", p.X.Min, p.X.Max, p.Y.Min, p.Y.Max)
	}
	var out []point
	for _, b := range p.GlyphBoxes(p) {
		r := float64(b.Max.X)
		if b.Min.X == -b.Max.X && b.Min.Y == -b.Max.Y && b.Max.X == b.Max.Y && r >= 2 {
			// Rounded to 1e-12: the normalization and its inverse may
			// each round the last bit.
			x := math.Round((p.X.Min+b.X*(p.X.Max-p.X.Min))*1e12) / 1e12
			y := math.Round((p.Y.Min+b.Y*(p.Y.Max-p.Y.Min))*1e12) / 1e12
			out = append(out, point{x, y, r})
		}
	}
	slices.SortFunc(out, func(a, b point) int {
		if a.x != b.x {
			if a.x < b.x {
				return -1
			}
			return 1
		}
		if a.y < b.y {
			return -1
		}
		if a.y > b.y {
			return 1
		}
		return 0
	})
	return out
}

// The figure of the worked example draws one marker per non-empty bin at
// (mean probability, accuracy), with area proportional to the bin's rows
// (radius² ratios equal row ratios: 40 rows against 10 is twice the
// radius); the uncalibrated bins add theirs; the caption states both
// ECEs as worked out above; and the PNG renders and decodes.
func TestReliabilityFigure(t *testing.T) {
	f, err := plot.Reliability(plot.Calibration{Set: "validation", Method: "temperature", Bins: handBins})
	if err != nil {
		t.Fatal(err)
	}
	got := markers(t, f)
	want := []point{{0.55, 0.6, 0}, {0.7, 0.6, 0}, {0.9, 0.85, 0}}
	if len(got) != len(want) {
		t.Fatalf("markers %v; want one at each of %v", got, want)
	}
	for i, w := range want {
		if got[i].x != w.x || got[i].y != w.y {
			t.Errorf("marker %d at (%v, %v); want (%v, %v)", i, got[i].x, got[i].y, w.x, w.y)
		}
	}
	// Bins of 10 and 40 rows: radius ratio √(40/10) = 2; the fullest bin
	// gets the largest radius, 9 pt (the package's choice).
	if r := got[2].r / got[0].r; math.Abs(r-2) > 1e-9 || got[1].r != got[0].r {
		t.Errorf("radii %v, %v, %v; want 10 and 10 rows equal and 40 rows twice as large", got[0].r, got[1].r, got[2].r)
	}
	if math.Abs(got[2].r-9) > 1e-9 {
		t.Errorf("the fullest bin's radius is %v pt; want 9", got[2].r)
	}
	if e := plot.ECE(handBins); math.Abs(e-3.5/60) > 1e-15 {
		t.Errorf("ECE %v; want 3.5/60 = %v (worked above)", e, 3.5/60)
	}
	if !strings.Contains(f.Caption, "Expected calibration error 0.05833 on 60 validation rows (5 equal bins)") {
		t.Errorf("caption %q does not state the ECE 0.05833 on 60 validation rows", f.Caption)
	}
	if !strings.Contains(f.Caption, "below the diagonal") || !strings.Contains(f.Caption, "overconfident") {
		t.Errorf("caption %q does not say how to read the diagram", f.Caption)
	}
	b, err := f.Bytes(plot.PNG)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := png.Decode(bytes.NewReader(b)); err != nil {
		t.Fatalf("the PNG does not decode: %v", err)
	}

	// With the uncalibrated bins: their two markers are added, at their
	// own points, and sized on the same scale (now 50 rows is the fullest
	// bin: 9 pt; 40 rows: 9·√(40/50)).
	g, err := plot.Reliability(plot.Calibration{Set: "validation", Bins: handBins, Uncalibrated: handRaw})
	if err != nil {
		t.Fatal(err)
	}
	all := markers(t, g)
	want = []point{{0.55, 0.6, 0}, {0.7, 0.6, 0}, {0.7, 0.6, 0}, {0.9, 0.85, 9 * math.Sqrt(0.8)}, {0.95, 0.8, 9}}
	if len(all) != len(want) {
		t.Fatalf("markers %v; want %v", all, want)
	}
	for i, w := range want {
		if all[i].x != w.x || all[i].y != w.y || (w.r > 0 && math.Abs(all[i].r-w.r) > 1e-9) {
			t.Errorf("marker %d is %v; want %v (radius 0: not checked)", i, all[i], w)
		}
	}
	if !strings.Contains(g.Caption, "0.1417 for the uncalibrated probabilities") {
		t.Errorf("caption %q does not state the uncalibrated ECE 0.1417", g.Caption)
	}
}

// Each marker is labelled with its rows: the SVG's text holds "40", a
// number no tick of a 0-to-1 axis prints.
func TestReliabilityLabels(t *testing.T) {
	f, err := plot.Reliability(plot.Calibration{Bins: handBins})
	if err != nil {
		t.Fatal(err)
	}
	b, err := f.Bytes(plot.SVG)
	if err != nil {
		t.Fatal(err)
	}
	var texts []string
	d := xml.NewDecoder(bytes.NewReader(b))
	for {
		tok, err := d.Token()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatalf("SVG does not parse: %v", err)
		}
		if c, ok := tok.(xml.CharData); ok {
			texts = append(texts, strings.TrimSpace(string(c)))
		}
	}
	if !slices.Contains(texts, "40") {
		t.Errorf("no label 40 among the SVG's texts %q", texts)
	}
}

// plot.ECE on bins gives the same bits as internal/calib.ECE on the rows
// the bins were made from (the same sum in the same order), here on 15
// bins of rows made up so that several bins are filled.
func TestReliabilityECEMatchesCalib(t *testing.T) {
	var conf []float64
	var correct []bool
	for i := range 200 {
		c := 0.5 + 0.5*math.Mod(float64(i)*0.6180339887, 1)
		conf, correct = append(conf, c), append(correct, math.Mod(float64(i)*0.381966, 1) < c-0.1)
	}
	var bins []plot.ReliabilityBin
	for _, b := range calib.Reliability(conf, correct, 15) {
		bins = append(bins, plot.ReliabilityBin{Lo: b.Lo, Hi: b.Hi, Rows: b.Rows, Confidence: b.Confidence, Accuracy: b.Accuracy})
	}
	want := calib.ECE(conf, correct, 15)
	if got := plot.ECE(bins); got != want || !(want > 0) {
		t.Errorf("plot.ECE %v; internal/calib.ECE %v", got, want)
	}
}

// No rows gives the package's no-data error, naming the figure; bad bins
// are errors.
func TestReliabilityNoData(t *testing.T) {
	for _, c := range []plot.Calibration{{}, {Bins: []plot.ReliabilityBin{{Lo: 0, Hi: 0.5}, {Lo: 0.5, Hi: 1}}}} {
		_, err := plot.Reliability(c)
		var nd *plot.ErrNoData
		if !errors.As(err, &nd) || nd.Figure != "reliability" {
			t.Errorf("Reliability(%v): %v; want *ErrNoData for reliability", c, err)
		}
	}
	if !math.IsNaN(plot.ECE(nil)) {
		t.Error("ECE of no rows is not NaN")
	}
	for _, b := range []plot.ReliabilityBin{
		{Rows: 3, Confidence: 1.2, Accuracy: 0.5},
		{Rows: 3, Confidence: 0.5, Accuracy: math.NaN()},
		{Rows: -1, Confidence: 0.5, Accuracy: 0.5},
	} {
		_, err := plot.Reliability(plot.Calibration{Bins: []plot.ReliabilityBin{b}})
		var nd *plot.ErrNoData
		if err == nil || errors.As(err, &nd) {
			t.Errorf("Reliability accepted bin %+v (err %v)", b, err)
		}
	}
}
