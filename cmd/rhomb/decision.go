package main

import (
	"bytes"
	"fmt"
	"io"
	"slices"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/recipe"
)

// fitDecision fits how the saved model answers (threshold, calibrated
// probabilities, prediction sets, reject option: recipe.FitDecision) on
// the validation rows, stores it in m, and returns what to print. Without
// validation rows, or with too few, the model keeps the plain rule and
// the lines say so.
func fitDecision[T net.Float](c *config, m *modelfile.Model[T], val *data.Set[T]) ([]string, error) {
	if val == nil || val.Rows < 4 {
		if c.Coverage > 0 || c.TargetError > 0 || (c.Threshold != "" && c.Threshold != "auto" && c.Threshold != "zero") {
			return nil, usageError{fmt.Errorf("train: -threshold, -coverage and -target-error are fitted on validation rows; set -holdout so that there are some")}
		}
		return nil, nil
	}
	d, rep, err := recipe.FitDecision(m, val, c.decisionOptions())
	if err != nil {
		return nil, err
	}
	m.Decision = d
	var lines []string
	if d != nil && d.Threshold != nil {
		if d.ThresholdFor == "given" {
			lines = append(lines, fmt.Sprintf("decision: the second class (%s) when the score is above %.6g (-threshold)", m.Classes[1], *d.Threshold))
		} else {
			lines = append(lines, fmt.Sprintf("decision: the second class (%s) when the score is above %.6g, chosen for validation %s: %.4f there, %.4f at 0",
				m.Classes[1], *d.Threshold, d.ThresholdFor, rep.AtThreshold, rep.AtZero))
		}
	}
	if d != nil && d.Calibration != nil {
		half := rep.Rows - rep.Rows/2
		lines = append(lines, fmt.Sprintf("probabilities: %s calibration fitted on %d validation rows; expected calibration error %.4f on the other %d (%.4f uncalibrated)",
			calibrationName(d.Calibration.Kind), half, rep.ECE, rep.Rows/2, rep.RawECE))
	}
	if d != nil && d.Sets != nil {
		lines = append(lines, fmt.Sprintf("prediction sets for %.3g coverage: %.3f classes per set on average, covering %.4f of the %d rows they were calibrated on",
			d.Sets.Coverage, rep.MeanSetSize, rep.Coverage, rep.Rows/2))
	}
	if d != nil && d.Abstain != nil {
		lines = append(lines, fmt.Sprintf("reject option for %.3g error: answers %.4f of the validation rows, with error %.4f among them (below normalized margin %.4g: no answer)",
			d.Abstain.TargetError, rep.Answered, rep.AnsweredError, d.Abstain.MarginFloor))
	}
	for _, n := range rep.Notes {
		lines = append(lines, "note: "+n)
	}
	return lines, nil
}

func calibrationName(kind string) string {
	if kind == "platt" {
		return "Platt"
	}
	return "temperature"
}

// writeLines prints lines, one per line.
func writeLines(w io.Writer, lines []string) {
	if len(lines) > 0 {
		fmt.Fprintln(w, strings.Join(lines, "\n"))
	}
}

// decidedConfusion counts the answers of the model as it is saved: with a
// two-class threshold in m's decision, a score above it means the second
// class (arith.Decide, the serving rule); otherwise as confusion does.
func decidedConfusion[T net.Float](model optim.Model[T], m *modelfile.Model[T], s *data.Set[T], classes []string) *score.Confusion {
	if m == nil || m.Decision == nil || m.Decision.Threshold == nil {
		return confusion(model, s, classes)
	}
	t := *m.Decision.Threshold
	c := score.New(classes)
	out64 := make([]float64, 0, 8)
	recipe.Predict(model, s, func(r int, out []T) {
		out64 = out64[:0]
		for _, v := range out {
			out64 = append(out64, float64(v))
		}
		c.Add(s.Class(r), arith.Decide(out64, t))
	})
	return c
}

// servedMargins records in metrics the normalized margins of the training
// rows as the saved model serves them (net/classify's Answer.Margin, the
// figure a server histograms): the minimum, the 5%, 50% and 95% points
// and the mean, under margin_min, margin_p05, margin_p50, margin_p95 and
// margin_mean, so that a server can show its live rows' margins beside
// them. Nothing is recorded when the model cannot be read back.
func servedMargins[T net.Float](m *modelfile.Model[T], set *data.Set[T], metrics map[string]any) {
	if set == nil || set.Rows == 0 {
		return
	}
	var b bytes.Buffer
	if modelfile.Write(&b, m) != nil {
		return
	}
	c, err := classify.Read(b.Bytes(), "trained model")
	if err != nil {
		return
	}
	x := make([]float64, len(set.X))
	for i, v := range set.X {
		x[i] = float64(v)
	}
	answers := make([]classify.Answer, set.Rows)
	if c.ClassifyVectors(nil, x, set.Rows, answers) != nil {
		return
	}
	v := make([]float64, set.Rows)
	var sum float64
	for r, a := range answers {
		v[r] = a.Margin
		sum += a.Margin
	}
	slices.Sort(v)
	// The p-quantile by linear interpolation between order statistics
	// (Hyndman and Fan 1996, definition 7; from memory).
	q := func(p float64) float64 {
		h := p * float64(len(v)-1)
		lo := int(h)
		if lo+1 >= len(v) {
			return v[len(v)-1]
		}
		return v[lo] + (h-float64(lo))*(v[lo+1]-v[lo])
	}
	metrics["margin_min"], metrics["margin_p05"], metrics["margin_p50"], metrics["margin_p95"] = v[0], q(0.05), q(0.5), q(0.95)
	metrics["margin_mean"] = sum / float64(len(v))
}
