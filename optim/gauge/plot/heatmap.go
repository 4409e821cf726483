package plot

import (
	"errors"
	"fmt"
	"image/color"
	"math"
	"strconv"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/palette/moreland"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"

	"github.com/rhomb/rhomb/optim/sweep"
)

// The heat map of a sweep (package optim/sweep): a measure over ρ0 and λ.

// cells averages a measure over every axis but ρ0 and λ: cells[i][j] is
// the mean of value(r) over the results r that succeeded, whose value is
// not NaN, and whose ρ0 is axes.Rho0[i] and λ is axes.WeightDecay[j]
// (that is, over learning rates, temperatures and seeds). A cell with no
// such result is NaN. A nil value means the validation score (ValScore).
func cells(axes sweep.Axes, results []sweep.Result, value func(sweep.Result) float64) [][]float64 {
	if value == nil {
		value = func(r sweep.Result) float64 { return r.ValScore }
	}
	pos := func(v []float64, x float64) int {
		for i, y := range v {
			if y == x {
				return i
			}
		}
		return -1
	}
	sum := make([][]float64, len(axes.Rho0))
	count := make([][]int, len(axes.Rho0))
	for i := range sum {
		sum[i] = make([]float64, len(axes.WeightDecay))
		count[i] = make([]int, len(axes.WeightDecay))
	}
	for _, r := range results {
		i, j := pos(axes.Rho0, r.Rho0), pos(axes.WeightDecay, r.WeightDecay)
		v := value(r)
		if i < 0 || j < 0 || r.Failed() || math.IsNaN(v) {
			continue
		}
		sum[i][j] += v
		count[i][j]++
	}
	for i := range sum {
		for j := range sum[i] {
			if count[i][j] == 0 {
				sum[i][j] = math.NaN()
			} else {
				sum[i][j] /= float64(count[i][j])
			}
		}
	}
	return sum
}

// HeatMapOptions chooses what a heat map shows. The zero value shows the
// validation score by the sweep's metric.
type HeatMapOptions struct {
	// Value is the measure to average into each cell (averaged over every axis but ρ0 and λ); nil
	// means Result.ValScore.
	Value func(sweep.Result) float64
	// Name names the measure in the title; empty means "validation " and
	// the sweep's metric.
	Name string
}

// cellGrid is a cells matrix as plotter.GridXYZ: column c is ρ0 number
// c, row r is λ number r, placed at integer coordinates so that every
// cell has the same size whatever the spacing of the values.
type cellGrid [][]float64

func (g cellGrid) Dims() (c, r int)   { return len(g), len(g[0]) }
func (g cellGrid) Z(c, r int) float64 { return g[c][r] }
func (g cellGrid) X(c int) float64    { return float64(c) }
func (g cellGrid) Y(r int) float64    { return float64(r) }

// HeatMap draws a measure (the validation score unless o says otherwise)
// over ρ0 (across) and λ (up), averaged over the learning rates,
// temperatures and seeds of each cell. Every cell is labelled with
// its value; a cell whose runs all failed is grey and labelled "failed".
// Colours run from blue (the lowest cell) to red (the highest). Save the
// plot with its Save method (the file's extension chooses PNG, SVG or
// PDF), or use SaveHeatMap.
func HeatMap(axes sweep.Axes, results []sweep.Result, o HeatMapOptions) (*gplot.Plot, error) {
	if len(axes.Rho0) == 0 || len(axes.WeightDecay) == 0 {
		return nil, errors.New("plot: HeatMap: the sweep's axes have no ρ0 or no λ")
	}
	name := o.Name
	if name == "" {
		name = "validation accuracy"
		if len(results) > 0 && results[0].Metric != "" {
			name = "validation " + results[0].Metric
		}
	}
	cg := cells(axes, results, o.Value)
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, col := range cg {
		for _, v := range col {
			if !math.IsNaN(v) {
				lo, hi = min(lo, v), max(hi, v)
			}
		}
	}
	p := gplot.New()
	rest := len(axes.LearningRate) * len(axes.Temperature) * len(axes.Seeds)
	p.Title.Text = fmt.Sprintf("%s, mean of %d runs per cell\n(over learning rate, temperature, seed; blue low, red high)", name, rest)
	p.X.Label.Text = "initial scale ρ0 = ∏‖W_k‖ (no unit)"
	p.Y.Label.Text = "weight decay λ (no unit)"
	// The cells fill the frame: no axis lines, the values as ticks.
	p.X.Width, p.Y.Width = 0, 0
	p.X.Padding, p.Y.Padding = 0, 0
	p.X.Tick.Marker = ticks(axes.Rho0)
	p.Y.Tick.Marker = ticks(axes.WeightDecay)

	if math.IsInf(lo, 1) { // every cell failed: grey cells only
		lo, hi = 0, 1
	}
	if lo == hi { // one value: give the palette a range around it
		lo, hi = lo-0.5, hi+0.5
	}
	hm := plotter.NewHeatMap(cellGrid(cg), moreland.SmoothBlueRed().Palette(64))
	hm.Min, hm.Max = lo, hi
	hm.NaN = color.Gray{Y: 0xc0}
	p.Add(hm)

	var xys plotter.XYs
	var labels []string
	for c, col := range cg {
		for r, v := range col {
			xys = append(xys, plotter.XY{X: float64(c), Y: float64(r)})
			if math.IsNaN(v) {
				labels = append(labels, "failed")
			} else {
				labels = append(labels, strconv.FormatFloat(v, 'f', 3, 64))
			}
		}
	}
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xys, Labels: labels})
	if err != nil {
		return nil, err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].XAlign, lb.TextStyle[i].YAlign = text.XCenter, text.YCenter
		lb.TextStyle[i].Font.Size = vg.Points(11)
	}
	p.Add(lb)
	return p, nil
}

// ticks labels integer positions 0, 1, … with the axis's values.
func ticks(values []float64) gplot.ConstantTicks {
	t := make(gplot.ConstantTicks, len(values))
	for i, v := range values {
		t[i] = gplot.Tick{Value: float64(i), Label: strconv.FormatFloat(v, 'g', -1, 64)}
	}
	return t
}

// SaveHeatMap draws HeatMap and writes it to path, in the format its
// extension names (.png, .svg, .pdf, …), sized to the grid: about 1.1
// inch per cell across and 0.6 inch per cell up, at least 5 × 3.5 inches.
func SaveHeatMap(path string, axes sweep.Axes, results []sweep.Result, o HeatMapOptions) error {
	p, err := HeatMap(axes, results, o)
	if err != nil {
		return err
	}
	w := max(vg.Length(len(axes.Rho0))*1.1*vg.Inch+1.5*vg.Inch, 5*vg.Inch)
	h := max(vg.Length(len(axes.WeightDecay))*0.6*vg.Inch+1.2*vg.Inch, 3.5*vg.Inch)
	if err := p.Save(w, h, path); err != nil {
		return fmt.Errorf("plot: heat map: %w", err)
	}
	return nil
}
