package plot

import (
	"errors"
	"fmt"
	"image/color"
	"math"

	gplot "gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"

	"github.com/rhomb/rhomb/optim/gauge"
)

// Options adds to a History what figures show beside it. The zero value
// is usable.
type Options struct {
	// Heldout names the set passed as gauge.RecorderOptions.Test, for
	// legends; empty means "test". Give "validation" when the recorder's
	// held-out set is the validation split.
	Heldout string
	// HeldoutLoss, when not nil, is the held-out set's mean loss after each
	// epoch, index by index with History.Epochs (NaN where not measured);
	// the recorder does not measure it.
	HeldoutLoss []float64
	// Start, when not nil, is a whole-set measurement taken before the
	// first step (gauge.Recorder.Measure). Curves per epoch then begin at
	// epoch 0 with it, and the histogram and spectrum figures compare it
	// with the end; without it they compare the first epoch measured.
	Start *gauge.Record
}

func (o Options) heldout() string {
	if o.Heldout == "" {
		return "test"
	}
	return o.Heldout
}

// epochs returns the epoch records, with Start first as epoch 0 when
// given, and the x value of each: epochs completed.
func (o Options) epochs(h *gauge.History) ([]*gauge.Record, []float64) {
	var recs []*gauge.Record
	var xs []float64
	if o.Start != nil {
		recs, xs = append(recs, o.Start), append(xs, 0)
	}
	for i := range h.Epochs {
		recs = append(recs, &h.Epochs[i])
		xs = append(xs, float64(h.Epochs[i].Epoch+1))
	}
	return recs, xs
}

// pick returns f of every record.
func pick(recs []*gauge.Record, f func(*gauge.Record) float64) []float64 {
	out := make([]float64, len(recs))
	for i, r := range recs {
		out[i] = f(r)
	}
	return out
}

const epochAxis = "epochs completed"

// Error draws the fraction of misclassified rows (margin ≤ 0) of the
// training and held-out sets after every epoch, in percent: the first
// thing to read, and the curve whose gap shows over-fitting.
func Error(h *gauge.History, o Options) (*Figure, error) {
	recs, xs := o.epochs(h)
	p := newPanel("Classification error", epochAxis, "error (% of rows)")
	pct := func(f func(*gauge.Record) float64) []float64 {
		v := pick(recs, f)
		for i := range v {
			v[i] *= 100
		}
		return v
	}
	a, err := line(p, "training", xs, pct(func(r *gauge.Record) float64 { return r.TrainError }), palette[0], false)
	if err != nil {
		return nil, err
	}
	b, err := line(p, o.heldout(), xs, pct(func(r *gauge.Record) float64 { return r.TestError }), palette[1], true)
	if err != nil {
		return nil, err
	}
	if !a && !b {
		return nil, &ErrNoData{Figure: "error", Need: "Train or Test set (whole-set margins)"}
	}
	p.Y.Min = 0
	return single("error", "Classification error per epoch",
		"Percent of rows with normalized margin ≤ 0. A held-out curve that rises while the training curve falls is over-fitting.", p), nil
}

// Loss draws the training loss per epoch (the mean over the epoch's
// minibatches, taken while the weights moved) and, when given, the
// held-out loss after each epoch; on a log scale when they span more than
// a decade.
func Loss(h *gauge.History, o Options) (*Figure, error) {
	recs, xs := o.epochs(h)
	if o.Start != nil {
		recs, xs = recs[1:], xs[1:] // the recorder has no loss before training
	}
	train := pick(recs, func(r *gauge.Record) float64 { return r.Loss })
	var held []float64
	if o.HeldoutLoss != nil {
		if len(o.HeldoutLoss) != len(h.Epochs) {
			return nil, fmt.Errorf("plot: %d held-out losses for %d epochs", len(o.HeldoutLoss), len(h.Epochs))
		}
		held = o.HeldoutLoss
	}
	p := newPanel("Loss", epochAxis, "loss (mean over rows)")
	isLog := logY(p, train, held)
	if isLog {
		p.Y.Label.Text = "loss (mean over rows, log scale)"
		train = toLog(train)
		if held != nil {
			held = toLog(held)
		}
	}
	a, err := line(p, "training (mean over the epoch's minibatches)", xs, train, palette[0], false)
	if err != nil {
		return nil, err
	}
	b := false
	if held != nil {
		if b, err = line(p, o.heldout()+" (after the epoch)", xs, held, palette[1], true); err != nil {
			return nil, err
		}
	}
	if !a && !b {
		return nil, &ErrNoData{Figure: "loss", Need: "epochs"}
	}
	// Headroom above the curves for the legend, which would otherwise sit
	// on a loss that starts high: a quarter of the range on a linear axis,
	// a factor 3 on a log one.
	if isLog {
		p.Y.Max += math.Log10(3)
	} else {
		p.Y.Max += (p.Y.Max - min(p.Y.Min, 0)) / 4
		p.Y.Min = min(p.Y.Min, 0)
	}
	return single("loss", "Loss per epoch",
		"The data term of the objective, without weight decay.", p), nil
}

// Scale draws ρ = ∏_k ‖W_k‖_F and the equilibrium scale ρ* over the steps
// (the minibatch ρ*, which is noisy, and its mean over each epoch), with
// the step where the equilibrium criterion first held. Theory says ρ moves
// to ρ* and then tracks it; a ρ far from ρ* late in a run means the run is
// not settled.
func Scale(h *gauge.History, o Options) (*Figure, error) {
	p := newPanel("Scale ρ and its equilibrium ρ*", "step (minibatch updates)", "scale ρ (no unit)")
	var xs, rho, star []float64
	for _, s := range h.Steps {
		xs, rho, star = append(xs, float64(s.Step)), append(rho, s.Rho), append(star, s.RhoStar)
	}
	var ex, estar, endx, erho []float64
	prev := 0
	for _, r := range h.Epochs {
		// The epoch's mean ρ* is drawn at the middle of its steps, where a
		// mean of a drifting quantity belongs.
		mid := float64(prev+r.Steps) / 2
		ex, estar = append(ex, mid), append(estar, r.RhoStarMean)
		endx, erho = append(endx, float64(r.Steps)), append(erho, r.Rho)
		prev = r.Steps
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, s := range [][]float64{rho, star, estar, erho} {
		for _, v := range s {
			if finite(v) {
				lo, hi = min(lo, v), max(hi, v)
			}
		}
	}
	if len(xs) > 0 {
		if _, err := line(p, "ρ* of the minibatch", xs, star, color.NRGBA{230, 159, 0, 140}, false); err != nil {
			return nil, err
		}
		if _, err := line(p, "ρ", xs, rho, palette[0], false); err != nil {
			return nil, err
		}
	} else if _, err := line(p, "ρ (end of epoch)", endx, erho, palette[0], false); err != nil {
		return nil, err
	}
	if _, err := line(p, "ρ*, mean over the epoch", ex, estar, palette[1], true); err != nil {
		return nil, err
	}
	if !(hi >= lo) {
		return nil, &ErrNoData{Figure: "scale", Need: "steps or epochs"}
	}
	p.X.Min, p.Y.Min = 0, 0
	if h.EquilibriumStep > 0 {
		x := float64(h.EquilibriumStep)
		v, err := plotter.NewLine(plotter.XYs{{X: x, Y: lo}, {X: x, Y: hi}})
		if err != nil {
			return nil, err
		}
		v.Color, v.Width = grey, vg.Points(1)
		v.Dashes = []vg.Length{vg.Points(2), vg.Points(2)}
		p.Add(v)
		p.Legend.Add(fmt.Sprintf("equilibrium reached (step %d)", h.EquilibriumStep), v)
	}
	caption := "ρ is the product of the layers' Frobenius norms; from a small ρ0 it should rise to ρ* and then follow it."
	if h.EquilibriumStep > 0 {
		caption += " The grey line marks where the equilibrium criterion first held."
	} else {
		caption += " The equilibrium criterion never held in this run."
	}
	return single("scale", "Scale ρ against its equilibrium ρ*", caption, p), nil
}

// Margins draws the mean and the minimum normalized margin of the
// training set (and of the held-out set, dashed) after every epoch. A
// minimum above 0 means every training row is classified right; theory
// ties a large minimum margin to good generalization.
func Margins(h *gauge.History, o Options) (*Figure, error) {
	recs, xs := o.epochs(h)
	p := newPanel("Normalized margins", epochAxis, "margin (output units, ρ = 1)")
	get := func(test, minimum bool) func(*gauge.Record) float64 {
		return func(r *gauge.Record) float64 {
			m := r.Train
			if test {
				m = r.Test
			}
			if m == nil {
				return math.NaN()
			}
			if minimum {
				return m.All.Min
			}
			return m.All.Mean
		}
	}
	drawn := false
	for _, s := range []struct {
		name          string
		test, minimum bool
	}{{"training, mean", false, false}, {"training, minimum", false, true}, {o.heldout() + ", mean", true, false}, {o.heldout() + ", minimum", true, true}} {
		c := palette[0]
		if s.minimum {
			c = palette[1]
		}
		ok, err := line(p, s.name, xs, pick(recs, get(s.test, s.minimum)), c, s.test)
		if err != nil {
			return nil, err
		}
		drawn = drawn || ok
	}
	if !drawn {
		return nil, &ErrNoData{Figure: "margins", Need: "Train or Test set (whole-set margins)"}
	}
	hline(p, 0, "0: the decision boundary")
	p.Legend.Top = false
	return single("margins", "Mean and minimum normalized margin per epoch",
		"The margin of a row is f_y − max_{j≠y} f_j of the network scaled to ρ = 1 (y·f for one output); below 0 the row is misclassified.", p), nil
}

// MarginHistogram draws the distribution of the training set's normalized
// margins at the start (Options.Start, or the first epoch measured) and
// at the last epoch measured. Mass moving right and away from 0 is what
// training should do; a long left tail is the rows it gets wrong.
func MarginHistogram(h *gauge.History, o Options) (*Figure, error) {
	var first, last *gauge.Record
	label := "start"
	if o.Start != nil && o.Start.Train != nil {
		first, label = o.Start, "before training"
	}
	for i := range h.Epochs {
		r := &h.Epochs[i]
		if r.Train == nil {
			continue
		}
		if first == nil {
			first, label = r, fmt.Sprintf("after epoch %d", r.Epoch+1)
		}
		last = r
	}
	if last == nil {
		return nil, &ErrNoData{Figure: "histogram", Need: "Train set (whole-set margins)"}
	}
	// Two panels, each on its own margin axis: at the start the margins
	// crowd around 0 and the recorder's bins follow each set of margins,
	// so one shared axis would flatten one of the two.
	panel := func(r *gauge.Record, when string, c color.Color) (*gplot.Plot, error) {
		p := newPanel("Training margins, "+when, "normalized margin (output units at ρ = 1)", "rows per bin")
		hs := r.Train.Hist
		bins := make([]plotter.HistogramBin, len(hs.Counts))
		var top float64
		for i, n := range hs.Counts {
			bins[i] = plotter.HistogramBin{Min: hs.Edges[i], Max: hs.Edges[i+1], Weight: float64(n)}
			top = max(top, float64(n))
		}
		hg := &plotter.Histogram{Bins: bins, Width: hs.Edges[1] - hs.Edges[0]}
		hg.LineStyle.Color, hg.LineStyle.Width = color.White, vg.Points(0.6)
		hg.FillColor = c
		p.Add(hg)
		if hs.Edges[0] <= 0 && hs.Edges[len(hs.Edges)-1] >= 0 {
			z, err := plotter.NewLine(plotter.XYs{{X: 0, Y: 0}, {X: 0, Y: top}})
			if err != nil {
				return nil, err
			}
			z.Color, z.Width = color.Black, vg.Points(1.2)
			z.Dashes = []vg.Length{vg.Points(3), vg.Points(2)}
			p.Add(z)
			p.Legend.Add("0: the decision boundary", z)
		}
		if out := hs.Under + hs.Over; out > 0 {
			p.Legend.Add(fmt.Sprintf("%d rows outside the bins", out))
		}
		p.Legend.Left = true
		p.Y.Min = 0
		return p, nil
	}
	var panels []*gplot.Plot
	if first != last {
		p, err := panel(first, label, palette[5])
		if err != nil {
			return nil, err
		}
		panels = append(panels, p)
	}
	p, err := panel(last, fmt.Sprintf("after epoch %d", last.Epoch+1), palette[1])
	if err != nil {
		return nil, err
	}
	panels = append(panels, p)
	return &Figure{Name: "histogram", Title: "Training margins at the start and at the end",
		Caption: "Rows per margin bin, each panel on its own axis; rows left of the dashed line at 0 are misclassified.",
		Width:   panelWidth * 0.72 * vg.Length(len(panels)), Height: panelHeight, Panels: panels}, nil
}

// Collapse draws the neural-collapse measures of the last hidden layer
// per epoch: NC1, NC2 (equinorm and equiangularity) and NC3, which tend to
// 0 under collapse, on a log scale; and NC4, the agreement of the network
// with the nearest class centre, which tends to 100 %.
func Collapse(h *gauge.History, o Options) (*Figure, error) {
	recs, xs := o.epochs(h)
	get := func(f func(*gauge.CollapseReport) float64) []float64 {
		return pick(recs, func(r *gauge.Record) float64 {
			if r.Collapse == nil {
				return math.NaN()
			}
			return f(r.Collapse)
		})
	}
	nc1 := get(func(c *gauge.CollapseReport) float64 { return c.NC1 })
	nc2n := get(func(c *gauge.CollapseReport) float64 { return c.NC2Norm })
	nc2a := get(func(c *gauge.CollapseReport) float64 { return c.NC2Angle })
	nc3 := get(func(c *gauge.CollapseReport) float64 { return c.NC3 })
	nc4 := get(func(c *gauge.CollapseReport) float64 { return 100 * c.NC4 })
	left := newPanel("NC1–NC3: 0 when collapsed", epochAxis, "value (no unit)")
	isLog := logY(left, nc1, nc2n, nc2a, nc3)
	if isLog {
		left.Y.Label.Text = "value (no unit, log scale)"
		nc1, nc2n, nc2a, nc3 = toLog(nc1), toLog(nc2n), toLog(nc2a), toLog(nc3)
	}
	drawn := false
	for i, s := range []struct {
		name string
		v    []float64
	}{{"NC1 within/between variability", nc1}, {"NC2 spread of class-mean norms", nc2n}, {"NC2 distance from simplex angles", nc2a}, {"NC3 readout vs class means", nc3}} {
		ok, err := line(left, s.name, xs, s.v, palette[i], i%2 == 1)
		if err != nil {
			return nil, err
		}
		drawn = drawn || ok
	}
	if !drawn {
		return nil, &ErrNoData{Figure: "collapse", Need: "Collapse measures"}
	}
	if isLog {
		// Room below the curves for the legend: two decades under the
		// smallest value.
		lo := math.Inf(1)
		for _, s := range [][]float64{nc1, nc2n, nc2a, nc3} {
			for _, v := range s {
				if finite(v) {
					lo = min(lo, v)
				}
			}
		}
		left.Y.Min = lo - 2
	}
	left.Legend.Top = false
	left.Legend.Left = true
	right := newPanel("NC4: 100 % when collapsed", epochAxis, "agreement (% of rows)")
	if _, err := line(right, "", xs, nc4, palette[4], false); err != nil {
		return nil, err
	}
	right.Y.Min, right.Y.Max = 0, 100
	f := &Figure{Name: "collapse", Title: "Neural collapse of the last hidden layer per epoch",
		Caption: "Measures of Papyan, Han and Donoho (2020) on the training set. A bias-free readout keeps the features' global mean, so NC3 stays away from 0 for ReLU features.",
		Width:   2 * panelWidth * 0.72, Height: panelHeight, Panels: []*gplot.Plot{left, right}}
	return f, nil
}

// Spectra draws the singular values of every layer's direction V_k (with
// ‖V_k‖_F = 1) at the end (solid) and at the start (dashed), largest first.
// A spectrum that drops fast after a few values is the low-rank tendency
// of trained layers; the legend gives each effective rank.
func Spectra(h *gauge.History, o Options) (*Figure, error) {
	var first, last []gauge.Spectrum
	label := "start"
	if o.Start != nil && o.Start.Spectra != nil {
		first, label = o.Start.Spectra, "before training"
	}
	lastEpoch := 0
	for i := range h.Epochs {
		r := &h.Epochs[i]
		if r.Spectra == nil {
			continue
		}
		if first == nil {
			first, label = r.Spectra, fmt.Sprintf("after epoch %d", r.Epoch+1)
		} else {
			last, lastEpoch = r.Spectra, r.Epoch+1
		}
	}
	if first == nil {
		return nil, &ErrNoData{Figure: "spectra", Need: "Spectra"}
	}
	p := newPanel("Singular values of each layer's direction V_k", "index i (largest first)", "singular value σ_i")
	draw := func(s []gauge.Spectrum, when string, dashed bool) error {
		for k, sp := range s {
			xs := make([]float64, len(sp.Values))
			for i := range xs {
				xs[i] = float64(i + 1)
			}
			name := fmt.Sprintf("%s, %s (eff. rank %.1f of %d)", sp.Layer, when, sp.EffectiveRank, len(sp.Values))
			if _, err := line(p, name, xs, sp.Values, palette[k%len(palette)], dashed); err != nil {
				return err
			}
		}
		return nil
	}
	if last != nil {
		if err := draw(first, label, true); err != nil {
			return nil, err
		}
		if err := draw(last, fmt.Sprintf("after epoch %d", lastEpoch), false); err != nil {
			return nil, err
		}
	} else if err := draw(first, label, false); err != nil {
		return nil, err
	}
	p.X.Min, p.Y.Min = 0, 0 // ticks at round indices
	return single("spectra", "Spectra of the layers' directions at the start and at the end",
		"Each V_k has Frobenius norm 1, so Σσ_i² = 1 for every layer and spectra compare on one scale; a fast drop is a layer concentrating on few directions.", p), nil
}

func single(name, title, caption string, p *gplot.Plot) *Figure {
	return &Figure{Name: name, Title: title, Caption: caption, Width: panelWidth, Height: panelHeight, Panels: []*gplot.Plot{p}}
}

// Builders lists the figure builders in the order All and the report show
// them.
var Builders = []func(*gauge.History, Options) (*Figure, error){
	Error, Loss, Scale, Margins, MarginHistogram, Collapse, Spectra,
}

// All returns every figure the History has data for, in the order of
// Builders, leaving out those that fail with *ErrNoData.
func All(h *gauge.History, o Options) ([]*Figure, error) {
	var out []*Figure
	for _, b := range Builders {
		f, err := b(h, o)
		if errors.Is(err, errNoData) {
			continue
		}
		if err != nil {
			return nil, err
		}
		out = append(out, f)
	}
	return out, nil
}
