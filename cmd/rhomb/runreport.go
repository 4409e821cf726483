package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"slices"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/calib"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/plot"
	htmlreport "github.com/rhomb/rhomb/optim/gauge/report"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// reportGamma is the margin γ of the report's bound, fixed here before any
// data is seen, as the bound requires (see optim/gauge).
const reportGamma = 0.1

// runReport gathers what -report FILE needs while a run goes on: the
// recorder of every epoch's whole-set measures and the held-out loss.
type runReport[T net.Float] struct {
	rec     *gauge.Recorder[T]
	track   *htmlreport.LossTrack[T]
	start   *gauge.Record
	heldout string
	bound   *gauge.BoundOptions
}

// newRunReport sets up the recorder on the validation split (the test
// split when there is none) and measures the starting weights, unless the
// run resumes, when the weights are not the start of anything.
func newRunReport[T net.Float](c *config, p *prepared[T], model optim.Model[T], lf loss.Func[T], resumed bool, steps, epochs int) (*runReport[T], error) {
	r := &runReport[T]{heldout: "validation"}
	held := p.val
	if held == nil {
		held, r.heldout = p.test, "test"
	}
	// The norm bound needs ReLU: gauge refuses smooth and polynomial
	// stand-ins, and the report then shows no bound.
	if c.Activation == "relu" {
		r.bound = &gauge.BoundOptions{Gamma: reportGamma}
	}
	var err error
	r.rec, err = gauge.NewRecorder(gauge.RecorderOptions[T]{
		Model: model, Train: p.train, Test: held,
		// About 5,000 step records and 60 epoch measurements at most, so
		// that long runs on big sets keep the report's cost small.
		StepEvery: max(1, steps/5000), EpochEvery: max(1, epochs/60),
		Collapse: true, Spectra: true, Bound: r.bound,
	})
	if err != nil {
		return nil, err
	}
	if held != nil {
		r.track = htmlreport.TrackLoss(model, lf, held)
	}
	if !resumed {
		m, err := r.rec.Measure()
		if err != nil {
			return nil, err
		}
		r.start = &m
	}
	return r, nil
}

// hooks returns the hooks to join with the command's own.
func (r *runReport[T]) hooks() *optim.Hooks {
	if r.track == nil {
		return r.rec.Hooks()
	}
	return optim.Join(r.rec.Hooks(), r.track.Hooks())
}

// write measures the final weights and writes the report to path; saved
// is the model file as it is saved, whose calibration, if any, the report
// shows on the held-out rows.
func (r *runReport[T]) write(path, title, source string, notes []string, c *config, p *prepared[T], model optim.Model[T],
	n *net.Network[T], res optim.Result, val, test *score.Confusion, saved *modelfile.Model[T]) error {
	var confusions []htmlreport.Confusion
	for _, s := range []struct {
		name string
		c    *score.Confusion
	}{{"validation", val}, {"test", test}} {
		if s.c != nil {
			confusions = append(confusions, htmlreport.Confusion{Name: s.name, Classes: s.c.Classes, Count: s.c.Count})
		}
	}
	final, err := htmlreport.FinalRecord(r.rec)
	if err != nil {
		return err
	}
	run := &htmlreport.Run{
		Title: title, Status: res.Status.String(), Epochs: res.Epochs, Steps: res.Steps,
		Network: htmlreport.Describe(n), Settings: reportSettings(c),
		Data: htmlreport.DescribeData(p.table, missingHandling(c.Missing),
			htmlreport.Named[T]{Name: "training", Set: p.train}, htmlreport.Named[T]{Name: "validation", Set: p.val},
			htmlreport.Named[T]{Name: "test", Set: p.test}),
		History: r.rec.History(), Heldout: r.heldout, Start: r.start, Final: final,
		Confusion: confusions, Notes: notes,
	}
	if source != "" {
		run.Data.Source = source
	}
	if r.track != nil {
		run.HeldoutLoss = r.track.Loss
	}
	held := p.val
	if held == nil {
		held = p.test
	}
	if run.Calibration, err = reliabilityOf(saved, held, r.heldout); err != nil {
		return err
	}
	if r.bound != nil {
		// The bound beside the test error when there is a test split,
		// else beside the validation error, named as such.
		set, name := p.test, "test"
		if set == nil {
			set, name = p.val, "validation"
		}
		if run.Bound, err = gauge.BoundOf[T](model, p.train, set, *r.bound); err != nil {
			return err
		}
		run.BoundSet = name
	}
	return htmlreport.WriteFile(path, run)
}

// reliabilityOf returns the reliability diagram's data for the saved
// model's calibrated probabilities on the rows of set (named name), or nil
// when the model holds no calibration or there are no rows. Each row is
// answered as every serving tool answers it: the model file is encoded to
// bytes and read back with package net/classify, and each row's feature
// vector classified. As rhomb check measures it, a row's confidence is
// its largest calibrated probability and it counts as right when the
// model's answer (Answer.Class, after any decision threshold) is its
// class; the rows are put into eceBins equal bins (calib.Reliability).
// The uncalibrated map of the same scores, p = (1 + clamp(s, −1, 1))/2 for
// one signed score and softmax(s) for several (as recipe.FitDecision
// compares it), is binned beside it with the same answers.
func reliabilityOf[T net.Float](saved *modelfile.Model[T], set *data.Set[T], name string) (*plot.Calibration, error) {
	if saved == nil || saved.Decision == nil || saved.Decision.Calibration == nil || set == nil || set.Rows == 0 {
		return nil, nil
	}
	var buf bytes.Buffer
	if err := modelfile.Write(&buf, saved); err != nil {
		return nil, err
	}
	cm, err := classify.Read(buf.Bytes(), "the saved model")
	if err != nil {
		return nil, err
	}
	x := make([]float64, len(set.X))
	for i, v := range set.X {
		x[i] = float64(v)
	}
	answers := make([]classify.Answer, set.Rows)
	if err := cm.ClassifyVectors(nil, x, set.Rows, answers); err != nil {
		return nil, fmt.Errorf("classifying the %s rows with the saved model: %w", name, err)
	}
	conf := make([]float64, set.Rows)
	raw := make([]float64, set.Rows)
	correct := make([]bool, set.Rows)
	var p []float64
	for r, a := range answers {
		conf[r] = slices.Max(a.Probabilities)
		correct[r] = a.Class == set.Class(r)
		if s := a.Scores; len(s) == 1 {
			p1 := (1 + max(-1, min(1, s[0]))) / 2
			raw[r] = max(p1, 1-p1)
		} else {
			p = slices.Grow(p[:0], len(s))[:len(s)]
			arith.Softmax(s, 1, p)
			raw[r] = slices.Max(p)
		}
	}
	c := &plot.Calibration{Set: name, Method: calibrationName(saved.Decision.Calibration.Kind),
		Bins: binsOf(calib.Reliability(conf, correct, eceBins)), Uncalibrated: binsOf(calib.Reliability(raw, correct, eceBins))}
	if name == "validation" {
		c.Note = "The calibration was fitted on half of these rows, which also chose the kept epoch, so it looks somewhat better here than on new rows; rhomb check on rows the run never saw measures it fairly."
	}
	return c, nil
}

func binsOf(bins []calib.Bin) []plot.ReliabilityBin {
	out := make([]plot.ReliabilityBin, len(bins))
	for i, b := range bins {
		out[i] = plot.ReliabilityBin{Lo: b.Lo, Hi: b.Hi, Rows: b.Rows, Confidence: b.Confidence, Accuracy: b.Accuracy}
	}
	return out
}

// reportSettings lists the run's training record (the settings stored in
// the model file), by name.
func reportSettings(c *config) []htmlreport.Setting {
	var m map[string]any
	if err := json.Unmarshal(c.record(), &m); err != nil {
		return nil
	}
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	out := make([]htmlreport.Setting, 0, len(keys))
	for _, k := range keys {
		v, _ := json.Marshal(m[k])
		out = append(out, htmlreport.Setting{Name: strings.ReplaceAll(k, "_", " "), Value: strings.Trim(string(v), `"`)})
	}
	return out
}

func missingHandling(policy string) string {
	switch policy {
	case "impute":
		return "imputed: the training rows' mean (numeric) or most frequent value (categorical)"
	case "drop":
		return "rows with a missing cell dropped when read"
	}
	return "none accepted: a missing cell stops the read"
}

func reportTitle(c *config) string {
	src := c.Data
	if src == "" {
		src = c.Images
	}
	return fmt.Sprintf("rhomb run report: %s", src)
}
