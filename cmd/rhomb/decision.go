package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
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
