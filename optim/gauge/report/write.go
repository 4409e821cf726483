package report

import (
	"bytes"
	_ "embed"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"

	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
)

// DefaultCautions are printed in every report unless Run.Cautions
// replaces them. They repeat the project's cautions (DEVELOPERS.md and
// the gauge package documentation) where the reader of a report will see
// them.
var DefaultCautions = []string{
	"A classifier is no safety guarantee. Where a model's output can drive decisions that hurt someone (alarms, interlocks, credit), validate it on your own data and follow local codes and licensed practice.",
	"These are diagnostics of a model on the data it was given. A large margin or a collapsed layer says nothing about rows unlike the training rows, or about data drawn from another distribution.",
	"The margin bound is loose: on data sets of thousands of rows it usually exceeds 1 and then says nothing about this model. Use it to compare runs on the same data, never as a prediction of the error. It holds only for a margin γ fixed before looking at the margins, and only for rows drawn independently from the training distribution.",
	"Test and validation figures are estimates from a finite sample: with n rows, an error rate p has a standard error of about √(p(1−p)/n).",
}

// Write writes r as one self-contained HTML page: figures are PNG data
// URIs, styles and the small load-check script are inline, and nothing
// refers to another file or to the network, so the page can be mailed or
// archived as it is. The markup is also well-formed XML, so tools without
// an HTML parser can read it.
func Write(w io.Writer, r *Run) error {
	if r == nil || r.History == nil {
		return errors.New("report: Write needs a Run with a History")
	}
	v, err := build(r)
	if err != nil {
		return err
	}
	var b bytes.Buffer
	if err := page.Execute(&b, v); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	_, err = w.Write(b.Bytes())
	return err
}

// WriteFile writes the report to path, through a temporary file in the
// same directory renamed into place, so that a reader never sees half a
// report.
func WriteFile(path string, r *Run) (err error) {
	f, err := os.CreateTemp(filepath.Dir(path), ".report-*.html")
	if err != nil {
		return err
	}
	defer func() {
		if err != nil {
			f.Close()
			os.Remove(f.Name())
		}
	}()
	if err = Write(f, r); err != nil {
		return err
	}
	if err = f.Close(); err != nil {
		return err
	}
	if err = os.Chmod(f.Name(), 0o644); err != nil {
		return err
	}
	return os.Rename(f.Name(), path)
}

//go:embed page.html
var pageText string

var page = template.Must(template.New("page").Funcs(template.FuncMap{
	"num": num, "pct": pct, "gap": gapText,
}).Parse(pageText))

// view is what the template reads.
type view struct {
	*Run
	Title     string
	Final     *gauge.Record
	Bound     *gauge.BoundReport
	Heldout   string
	BoundSet  string
	Figures   []figureView
	Matrices  []matrixView
	EpochRows []epochView
	Cautions  []string
	Glance    []glance
	// Reliability is the calibration section, nil without Run.Calibration.
	Reliability *reliabilityView
}

type reliabilityView struct {
	Figure      figureView
	Set, Method string
	Rows, Bins  int
	// ECE and RawECE (when HasRaw) as plot.ECE computes them from the
	// bins.
	ECE, RawECE float64
	HasRaw      bool
}

type figureView struct {
	Name, Title, Caption, Alt string
	Src                       template.URL
	Width, Height             int
}

type matrixView struct {
	Name     string
	Accuracy float64
	Rows     int
	Classes  []string
	Count    [][]int
	PerClass []score.Class
}

type epochView struct {
	Epoch                         int // completed
	Steps                         int
	Loss, HeldoutLoss             float64
	TrainError, TestError         float64
	Rho, RhoStar, Gap             float64
	MinMargin, MeanMargin         float64
	NC1, NC2, NC3, NC4            float64
	Measured, HasHeldout          bool
	HasCollapse, AtEquilibriumNow bool
}

// glance is one line of the summary table. ID names the quantity for
// tools (and tests) that read the page; Value is shown with Format.
type glance struct {
	ID, Name, Note string
	Text           string // shown instead of Value when not empty
	Value          float64
	Percent        bool
}

func build(r *Run) (*view, error) {
	h := r.History
	v := &view{Run: r, Title: r.Title, Final: r.Final, Bound: r.Bound, Heldout: r.Heldout, Cautions: r.Cautions}
	if v.Title == "" {
		v.Title = "rhomb run report"
	}
	if v.Heldout == "" {
		v.Heldout = "test"
	}
	v.BoundSet = r.BoundSet
	if v.BoundSet == "" {
		v.BoundSet = "test"
	}
	if v.Final == nil {
		v.Final = h.Last()
	}
	if v.Bound == nil && v.Final != nil {
		v.Bound = v.Final.Bound
	}
	if v.Cautions == nil {
		v.Cautions = DefaultCautions
	}
	if r.HeldoutLoss != nil && len(r.HeldoutLoss) != len(h.Epochs) {
		return nil, fmt.Errorf("report: %d held-out losses for %d epochs", len(r.HeldoutLoss), len(h.Epochs))
	}

	figs, err := plot.All(h, plot.Options{Heldout: v.Heldout, HeldoutLoss: r.HeldoutLoss, Start: r.Start})
	if err != nil {
		return nil, err
	}
	for _, f := range figs {
		fv, err := figureOf(f)
		if err != nil {
			return nil, err
		}
		v.Figures = append(v.Figures, fv)
	}
	if c := r.Calibration; c != nil {
		f, err := plot.Reliability(*c)
		if err != nil {
			return nil, fmt.Errorf("report: %w", err)
		}
		fv, err := figureOf(f)
		if err != nil {
			return nil, err
		}
		rv := &reliabilityView{Figure: fv, Set: c.Set, Method: c.Method, Bins: len(c.Bins), ECE: plot.ECE(c.Bins)}
		if rv.Set == "" {
			rv.Set = "held-out"
		}
		for _, b := range c.Bins {
			rv.Rows += b.Rows
		}
		if c.Uncalibrated != nil {
			rv.RawECE, rv.HasRaw = plot.ECE(c.Uncalibrated), true
		}
		v.Reliability = rv
	}
	for _, c := range r.Confusion {
		s := c.score()
		v.Matrices = append(v.Matrices, matrixView{Name: c.Name, Accuracy: s.Accuracy(), Rows: s.Total(), Classes: c.Classes, Count: c.Count, PerClass: s.PerClass()})
	}
	for i, e := range h.Epochs {
		ev := epochView{Epoch: e.Epoch + 1, Steps: e.Steps, Loss: e.Loss, HeldoutLoss: math.NaN(),
			TrainError: e.TrainError, TestError: e.TestError, Rho: e.Rho, RhoStar: e.RhoStarMean, Gap: e.GapMean,
			MinMargin: math.NaN(), MeanMargin: math.NaN(), NC1: math.NaN(), NC2: math.NaN(), NC3: math.NaN(), NC4: math.NaN()}
		if r.HeldoutLoss != nil {
			ev.HeldoutLoss = r.HeldoutLoss[i]
		}
		if e.Train != nil {
			ev.MinMargin, ev.MeanMargin = e.Train.All.Min, e.Train.All.Mean
		}
		if c := e.Collapse; c != nil {
			ev.NC1, ev.NC2, ev.NC3, ev.NC4 = c.NC1, c.NC2Norm, c.NC3, c.NC4
		}
		v.EpochRows = append(v.EpochRows, ev)
	}
	v.Glance = glanceOf(v, h)
	return v, nil
}

// figureOf encodes f as a PNG data URI shown at its nominal size.
func figureOf(f *plot.Figure) (figureView, error) {
	png, err := f.Bytes(plot.PNG)
	if err != nil {
		return figureView{}, fmt.Errorf("report: figure %s: %w", f.Name, err)
	}
	wd, ht := f.PixelSize()
	return figureView{Name: f.Name, Title: f.Title, Caption: f.Caption, Alt: f.Title,
		Src: template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(png)), Width: wd, Height: ht}, nil
}

// glanceOf picks the figures a reader wants first: how well the model
// classifies, and whether the run settled.
func glanceOf(v *view, h *gauge.History) []glance {
	var g []glance
	add := func(id, name, note string, x float64, percent bool) {
		if !math.IsNaN(x) {
			g = append(g, glance{ID: id, Name: name, Note: note, Value: x, Percent: percent})
		}
	}
	for _, m := range v.Matrices {
		add("accuracy-"+m.Name, "accuracy, "+m.Name, fmt.Sprintf("%d rows", m.Rows), m.Accuracy, true)
	}
	if c := v.Reliability; c != nil {
		add("ece", "expected calibration error, "+c.Set, fmt.Sprintf("calibrated probabilities, %d rows", c.Rows), c.ECE, false)
	}
	if f := v.Final; f != nil {
		add("train-error", "training error", "rows with margin ≤ 0", f.TrainError, true)
		add("heldout-error", v.Heldout+" error", "rows with margin ≤ 0", f.TestError, true)
		add("rho", "ρ", "product of the layers' norms", f.Rho, false)
		add("rho-star", "ρ*, mean over the last epoch", "equilibrium scale", f.RhoStarMean, false)
		add("gap", "|ρ − ρ*|/ρ*, mean over the last epoch", "", f.GapMean, false)
		if f.Train != nil {
			add("train-margin-min", "minimum training margin", "normalized, at ρ = 1", f.Train.All.Min, false)
			add("train-margin-mean", "mean training margin", "normalized, at ρ = 1", f.Train.All.Mean, false)
		}
		if f.Collapse != nil {
			add("nc1", "NC1", "→ 0 under collapse", f.Collapse.NC1, false)
			add("nc4", "NC4", "→ 100 % under collapse", f.Collapse.NC4, true)
		}
	}
	if b := v.Bound; b != nil {
		add("bound", "margin bound on the error rate", fmt.Sprintf("γ = %s, δ = %s; loose", num(b.Gamma), num(b.Delta)), b.Bound, false)
		add("bound-test-error", "measured "+v.BoundSet+" error", "beside the bound", b.TestError, true)
	}
	if h.EquilibriumStep > 0 {
		add("equilibrium-step", "equilibrium first reached at step", "criterion in the settings", float64(h.EquilibriumStep), false)
	} else {
		g = append(g, glance{ID: "equilibrium-step", Name: "equilibrium", Note: "criterion in the settings", Text: "not reached", Value: math.NaN()})
	}
	return g
}

// num prints a value with four significant digits; "–" for NaN, which
// means "not measured" throughout the report.
func num(x float64) string {
	if math.IsNaN(x) {
		return "–"
	}
	if math.IsInf(x, 0) {
		return strconv.FormatFloat(x, 'g', -1, 64)
	}
	if x == math.Trunc(x) && math.Abs(x) < 1e9 {
		return strconv.FormatFloat(x, 'f', 0, 64)
	}
	return strconv.FormatFloat(x, 'g', 4, 64)
}

// pct prints a fraction as a percentage with two decimals.
func pct(x float64) string {
	if math.IsNaN(x) {
		return "–"
	}
	return strconv.FormatFloat(100*x, 'f', 2, 64) + " %"
}

// gapText says how the bound compares with the measured test error.
func gapText(b *gauge.BoundReport, set string) string {
	switch {
	case math.IsNaN(b.TestError):
		return "No held-out set was measured beside it."
	case b.Bound >= 1:
		return fmt.Sprintf("The bound is %s, above 1, so it says nothing about this model's error rate (measured on the %s set: %s); compare it between runs on the same data only.", num(b.Bound), set, pct(b.TestError))
	default:
		return fmt.Sprintf("The bound is %s against a measured %s error of %s.", num(b.Bound), set, pct(b.TestError))
	}
}
