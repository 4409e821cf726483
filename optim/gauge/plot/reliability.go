package plot

import (
	"fmt"
	"math"
	"strconv"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// ReliabilityBin is one confidence bin of a reliability diagram: the
// rows whose top-class probability lies in [Lo, Hi), how many there are,
// their mean top-class probability (Confidence) and the fraction of them
// answered right (Accuracy). An empty bin has Rows = 0 and is not drawn.
// It mirrors the bins of the library's calibration code, so that a caller
// outside this module can fill it.
type ReliabilityBin struct {
	Lo, Hi     float64
	Rows       int
	Confidence float64
	Accuracy   float64
}

// Calibration is what a reliability diagram shows: the bins of a model's
// calibrated top-class probability on some labelled rows and, when not
// nil, the bins of the uncalibrated map on the same rows.
type Calibration struct {
	// Set names the rows, for the caption ("validation"); empty means
	// "held-out".
	Set string
	// Method names the calibration ("Platt", "temperature"), for the
	// legend; empty leaves it out.
	Method string
	// Bins are the calibrated probabilities' bins, in order.
	Bins []ReliabilityBin
	// Uncalibrated, when not nil, are the bins of the probabilities the
	// scores give before calibration, drawn beside Bins.
	Uncalibrated []ReliabilityBin
	// Note, when not empty, is a sentence added to the caption: what the
	// rows were used for, say.
	Note string
}

func (c *Calibration) set() string {
	if c.Set == "" {
		return "held-out"
	}
	return c.Set
}

// ECE is the expected calibration error of bins: the mean over rows of
// |accuracy − confidence| of each row's bin,
//
//	ECE = Σ_b (n_b/n)·|accuracy_b − confidence_b|,
//
// summed in bin order as internal/calib.ECE sums it, so both give the same
// bits on the same bins. NaN when the bins hold no rows.
func ECE(bins []ReliabilityBin) float64 {
	var e float64
	n := 0
	for _, b := range bins {
		e += float64(b.Rows) * math.Abs(b.Accuracy-b.Confidence)
		n += b.Rows
	}
	if n == 0 {
		return math.NaN()
	}
	return e / float64(n)
}

// rows is the number of rows in bins.
func rows(bins []ReliabilityBin) int {
	n := 0
	for _, b := range bins {
		n += b.Rows
	}
	return n
}

// Marker radii of a reliability diagram's points: the area of a point is
// proportional to its bin's rows, the fullest bin at the largest radius;
// no point is drawn smaller than the smallest, so a bin of one row stays
// visible (it is then labelled with its count all the same).
const (
	reliabilityMaxRadius = 9.0 // points
	reliabilityMinRadius = 2.5 // points
)

// Reliability draws a reliability diagram: for each non-empty bin of
// c.Bins, the fraction of its rows answered right (up) against their mean
// top-class probability (across), as a point whose area is proportional
// to the bin's rows and which is labelled with their number; the
// diagonal, where a perfectly calibrated model's points lie; and, when
// c.Uncalibrated is given, the same curve for the uncalibrated
// probabilities, dashed. Both axes are ticked from 0 to 1 (the y axis
// goes on a little for the legend). The caption states
// the expected calibration error (ECE) of c.Bins, and of c.Uncalibrated
// when given.
//
// Bins with no rows give *ErrNoData. A bin with negative rows, or a
// confidence or accuracy outside [0, 1], is an error.
func Reliability(c Calibration) (*Figure, error) {
	for _, bs := range [][]ReliabilityBin{c.Bins, c.Uncalibrated} {
		for i, b := range bs {
			if b.Rows < 0 || !(b.Confidence >= 0 && b.Confidence <= 1) || !(b.Accuracy >= 0 && b.Accuracy <= 1) {
				return nil, fmt.Errorf("plot: reliability bin %d: %d rows, confidence %v, accuracy %v; want rows ≥ 0 and both in [0, 1]", i, b.Rows, b.Confidence, b.Accuracy)
			}
		}
	}
	n := rows(c.Bins)
	if n == 0 {
		return nil, &ErrNoData{Figure: "reliability", Need: "rows in its bins", In: "the calibration"}
	}
	most := 0
	for _, bs := range [][]ReliabilityBin{c.Bins, c.Uncalibrated} {
		for _, b := range bs {
			most = max(most, b.Rows)
		}
	}
	p := newPanel("Reliability of the top-class probability", "mean top-class probability in the bin", "fraction of the bin's rows answered right")
	// Both axes are probabilities, ticked from 0 to 1; the y axis runs on
	// to reliabilityHeadroom so that the legend sits above every point
	// (bins answered all right lie on y = 1).
	p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = 0, 1, 0, reliabilityHeadroom
	p.X.Tick.Marker, p.Y.Tick.Marker = unitTicks{}, unitTicks{}
	p.Legend.Left = true
	p.Legend.XOffs, p.Legend.YOffs = vg.Millimeter*2, -vg.Millimeter

	diag, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: 1, Y: 1}})
	if err != nil {
		return nil, err
	}
	diag.Color, diag.Width = grey, vg.Points(1)
	diag.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
	p.Add(diag)
	p.Legend.Add("perfect calibration", diag)

	// series adds one curve: a line through the non-empty bins' points
	// and the points themselves, sized by rows.
	series := func(bs []ReliabilityBin, name string, colour int, dashed bool, glyph draw.GlyphDrawer) (plotter.XYs, []int, error) {
		var pts plotter.XYs
		var counts []int
		for _, b := range bs {
			if b.Rows > 0 {
				pts = append(pts, plotter.XY{X: b.Confidence, Y: b.Accuracy})
				counts = append(counts, b.Rows)
			}
		}
		if len(pts) == 0 {
			return nil, nil, nil
		}
		l, err := plotter.NewLine(pts)
		if err != nil {
			return nil, nil, err
		}
		l.Color, l.Width = palette[colour], vg.Points(1.6)
		if dashed {
			l.Dashes = []vg.Length{vg.Points(5), vg.Points(3)}
		}
		p.Add(l)
		s, err := plotter.NewScatter(pts)
		if err != nil {
			return nil, nil, err
		}
		s.GlyphStyle = draw.GlyphStyle{Color: palette[colour], Radius: vg.Points(reliabilityMaxRadius), Shape: glyph}
		s.GlyphStyleFunc = func(i int) draw.GlyphStyle {
			g := s.GlyphStyle
			g.Radius = vg.Points(markerRadius(counts[i], most))
			return g
		}
		p.Add(s)
		// The legend's sample: the line with a marker of middle size.
		leg := *s
		leg.GlyphStyleFunc = nil
		leg.GlyphStyle.Radius = vg.Points(4)
		p.Legend.Add(name, l, &leg)
		return pts, counts, nil
	}
	name := "calibrated"
	if c.Method != "" {
		name += " (" + c.Method + ")"
	}
	pts, counts, err := series(c.Bins, name+"; point area by rows", 0, false, draw.CircleGlyph{})
	if err != nil {
		return nil, err
	}
	if c.Uncalibrated != nil {
		if _, _, err := series(c.Uncalibrated, "uncalibrated", 1, true, draw.SquareGlyph{}); err != nil {
			return nil, err
		}
	}
	// Each calibrated point is labelled with its rows, just right of it.
	for i, k := range counts {
		lab, err := plotter.NewLabels(plotter.XYLabels{XYs: pts[i : i+1], Labels: []string{strconv.Itoa(k)}})
		if err != nil {
			return nil, err
		}
		st := &lab.TextStyle[0]
		st.Font = p.Legend.TextStyle.Font
		st.Font.Size = 9
		st.Color = palette[0]
		st.YAlign = -0.5 // centred on the point's height
		lab.Offset = vg.Point{X: vg.Points(markerRadius(k, most) + 1.5)}
		p.Add(lab)
	}

	caption := fmt.Sprintf("Expected calibration error %s on %d %s rows (%d equal bins)", fmtECE(ECE(c.Bins)), n, c.set(), len(c.Bins))
	if c.Uncalibrated != nil {
		caption += fmt.Sprintf("; %s for the uncalibrated probabilities (dashed)", fmtECE(ECE(c.Uncalibrated)))
	}
	caption += ". Each point is one bin of rows by their top-class probability: across, the mean probability; up, the fraction answered right; the number beside it, its rows. Points below the diagonal mean the model is overconfident there (it is right less often than it says), points above it underconfident; bins of few rows scatter by chance."
	if c.Note != "" {
		caption += " " + c.Note
	}
	f := single("reliability", "Reliability diagram of the calibrated probabilities", caption, p)
	// Taller than wide, so that with the headroom a unit of probability
	// is about as long on both axes and the diagonal near 45°.
	f.Width, f.Height = 13*vg.Centimeter, 15*vg.Centimeter
	return f, nil
}

// reliabilityHeadroom is the top of a reliability diagram's y axis: the
// band above 1 holds the legend.
const reliabilityHeadroom = 1.3

// unitTicks ticks a probability axis: labelled ticks at 0, 0.2, …, 1 and
// unlabelled ones halfway between, none beyond 1.
type unitTicks struct{}

func (unitTicks) Ticks(lo, hi float64) []gplot.Tick {
	var out []gplot.Tick
	for i := 0; i <= 10; i++ {
		v := float64(i) / 10
		if v < lo || v > hi {
			continue
		}
		t := gplot.Tick{Value: v}
		if i%2 == 0 {
			t.Label = strconv.FormatFloat(v, 'g', -1, 64)
		}
		out = append(out, t)
	}
	return out
}

// markerRadius is the radius in points of a bin of k rows when the
// fullest bin holds most: area proportional to rows, not below the
// smallest radius.
func markerRadius(k, most int) float64 {
	return max(reliabilityMinRadius, reliabilityMaxRadius*math.Sqrt(float64(k)/float64(most)))
}

// fmtECE prints an ECE with four significant digits, as the report prints
// its numbers.
func fmtECE(x float64) string {
	return strconv.FormatFloat(x, 'g', 4, 64)
}
