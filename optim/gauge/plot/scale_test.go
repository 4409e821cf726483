package plot

import (
	"math"
	"strings"
	"testing"

	gplot "gonum.org/v1/plot"
)

// logY chooses a log axis exactly when every finite value is positive and
// they span more than a decade (a factor of 10: the choice is ours, and
// this pins it). NaN and Inf mean "not measured" and are ignored.
func TestLogYChoice(t *testing.T) {
	nan := math.NaN()
	for _, c := range []struct {
		ys   []float64
		want bool
	}{
		{[]float64{1, 100}, true},
		{[]float64{1, 10}, false}, // exactly a decade: linear
		{[]float64{0.5, 2}, false},
		{[]float64{0, 100}, false},  // a zero has no logarithm
		{[]float64{-1, 100}, false}, // nor has a negative value
		{[]float64{nan, 0.01, math.Inf(1), 5}, true},
		{[]float64{nan}, false},
	} {
		p := gplot.New()
		if got := logY(p, c.ys); got != c.want {
			t.Errorf("logY(%v) = %v; want %v", c.ys, got, c.want)
		}
		if _, isLog := p.Y.Tick.Marker.(decades); isLog != c.want {
			t.Errorf("logY(%v) set log scale %v; want %v", c.ys, isLog, c.want)
		}
	}
}

// decades labels each power of ten in range and marks 2 to 9 times it:
// from log10(0.05) to log10(20), labels 0.1, 1 and 10, and minor ticks at
// 0.05 to 0.09, 0.2 to 0.9, 2 to 9 and 20 (counted by hand: 5 + 8 + 8 + 1).
func TestDecades(t *testing.T) {
	ticks := decades{}.Ticks(math.Log10(0.05), math.Log10(20))
	var labels []string
	minor := 0
	for _, tk := range ticks {
		if tk.Label != "" {
			labels = append(labels, tk.Label)
		} else {
			minor++
		}
	}
	if strings.Join(labels, " ") != "0.1 1 10" || minor != 22 {
		t.Errorf("labels %v and %d minor ticks; want 0.1 1 10 and 22", labels, minor)
	}
}

// line leaves out points that are not finite, and reports a curve with
// none as not drawn.
func TestLineSkipsUnmeasured(t *testing.T) {
	p := newPanel("t", "x", "y")
	nan := math.NaN()
	ok, err := line(p, "a", []float64{0, 1, 2}, []float64{nan, nan, nan}, palette[0], false)
	if err != nil || ok {
		t.Errorf("all-NaN curve: drawn %v, err %v; want not drawn, no error", ok, err)
	}
	ok, err = line(p, "b", []float64{0, 1, 2}, []float64{1, nan, 3}, palette[0], false)
	if err != nil || !ok {
		t.Errorf("curve with two finite points: drawn %v, err %v; want drawn", ok, err)
	}
	if p.Y.Min != 1 || p.Y.Max != 3 {
		t.Errorf("y range %v to %v; want 1 to 3 from the finite points", p.Y.Min, p.Y.Max)
	}
}
