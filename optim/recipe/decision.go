package recipe

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/calib"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// ThresholdRule says how a two-class model's decision threshold is set.
type ThresholdRule int

const (
	// ThresholdZero keeps the untuned rule: a positive score means the
	// second class. It is the zero value.
	ThresholdZero ThresholdRule = iota
	// ThresholdForMetric chooses the threshold on the validation rows that
	// maximizes the ranking metric (balanced accuracy when the run ranks
	// by AUC, which no threshold changes).
	ThresholdForMetric
	// ThresholdGiven uses DecisionOptions.Threshold as it is.
	ThresholdGiven
)

// DecisionOptions chooses what FitDecision fits. The zero value fits the
// calibration only: threshold 0, no prediction sets, no reject option.
type DecisionOptions struct {
	Rule      ThresholdRule
	Threshold float64 // for ThresholdGiven
	Metric    Metric  // for ThresholdForMetric
	// NoCalibration leaves the probabilities out (and so the sets).
	NoCalibration bool
	// Coverage, in (0, 1), asks for split-conformal prediction sets that
	// hold the true class with at least this probability; 0 asks for none.
	Coverage float64
	// TargetError, in (0, 1), asks for a reject option: the model
	// abstains on rows whose normalized margin is below the floor at
	// which the validation rows it answers have at most this error rate;
	// 0 asks for none.
	TargetError float64
	// Seed splits the validation rows into the half that fits the
	// calibration and the half that calibrates the prediction sets.
	Seed uint64
}

// DefaultDecision is what rhomb train fits unless told otherwise: a
// calibration, and the decision threshold by the rule the benchmark suite
// chose (docs/defaults.md); no prediction sets and no reject option,
// which need a level only the user can choose.
func DefaultDecision() DecisionOptions { return DecisionOptions{Rule: ThresholdZero} }

// DecisionReport says what FitDecision fitted and measured, on the
// validation rows.
type DecisionReport struct {
	Rows int
	// Threshold and the metric's value there, and at threshold 0.
	Threshold, AtThreshold, AtZero float64
	// ECE is the expected calibration error of the top-class probability
	// on the rows the calibration was not fitted on (15 equal bins), and
	// RawECE the same for the uncalibrated map (for one signed score,
	// p = (1 + clamp(s, −1, 1))/2; for several, softmax(s)).
	ECE, RawECE float64
	// Coverage and MeanSetSize of the prediction sets on the calibration
	// half (by construction at least the coverage asked for).
	Coverage, MeanSetSize float64
	// Answered is the fraction of validation rows the reject option
	// answers, and AnsweredError their error rate.
	Answered, AnsweredError float64
	// Notes say what could not be fitted, in users' words.
	Notes []string
}

// FitDecision fits, on the validation rows val, the maps a served model
// answers with (schema.Decision): a two-class decision threshold, Platt
// or temperature calibration, split-conformal prediction sets and a
// reject option on the normalized margin. It computes the validation
// scores with the serving reader (package net/classify) on file's own
// bytes, so the maps are fitted on exactly the scores every serving tool
// computes.
//
// The calibration is fitted on one half of the validation rows (seeded
// split), the prediction sets calibrated on the other; the threshold and
// the reject floor use every validation row. The conformal guarantee
// holds for rows exchangeable with that half; those rows also chose the
// kept epoch, a small departure from the textbook split.
func FitDecision[T net.Float](file *modelfile.Model[T], val *data.Set[T], o DecisionOptions) (*schema.Decision, *DecisionReport, error) {
	if val == nil || val.Rows < 4 {
		return nil, nil, errors.New("recipe: fitting how the model answers needs at least 4 validation rows")
	}
	if o.Coverage != 0 && !(o.Coverage > 0 && o.Coverage < 1) {
		return nil, nil, fmt.Errorf("recipe: coverage %v: want a level between 0 and 1, such as 0.9", o.Coverage)
	}
	if o.TargetError != 0 && !(o.TargetError > 0 && o.TargetError < 1) {
		return nil, nil, fmt.Errorf("recipe: target error %v: want a rate between 0 and 1, such as 0.05", o.TargetError)
	}
	plain := *file
	plain.Decision = nil
	var buf bytes.Buffer
	if err := modelfile.Write(&buf, &plain); err != nil {
		return nil, nil, err
	}
	cm, err := classify.Read(buf.Bytes(), "trained model")
	if err != nil {
		return nil, nil, err
	}
	rows, k := val.Rows, cm.Outputs()
	x := make([]float64, len(val.X))
	for i, v := range val.X {
		x[i] = float64(v)
	}
	answers := make([]classify.Answer, rows)
	if err := cm.ClassifyVectors(nil, x, rows, answers); err != nil {
		return nil, nil, fmt.Errorf("recipe: scoring the validation rows: %w", err)
	}
	scores := make([]float64, 0, rows*k)
	truth := make([]int, rows)
	for r, a := range answers {
		scores = append(scores, a.Scores...)
		truth[r] = val.Class(r)
	}
	d := &schema.Decision{Rows: rows}
	rep := &DecisionReport{Rows: rows}
	two := k == 1
	threshold := 0.0
	if two {
		positive := make([]bool, rows)
		for r, c := range truth {
			positive[r] = c == 1
		}
		switch o.Rule {
		case ThresholdGiven:
			if math.IsNaN(o.Threshold) || math.IsInf(o.Threshold, 0) {
				return nil, nil, fmt.Errorf("recipe: threshold %v: want a finite number", o.Threshold)
			}
			threshold = o.Threshold
			d.Threshold, d.ThresholdFor = &threshold, "given"
		case ThresholdForMetric:
			m := calibMetric(o.Metric)
			t, v := calib.BestThreshold(scores, positive, m)
			_, v0 := calib.ThresholdValue(scores, positive, m, 0)
			threshold = t
			d.Threshold, d.ThresholdFor = &threshold, metricName(o.Metric)
			rep.AtThreshold, rep.AtZero = v, v0
		}
		rep.Threshold = threshold
	} else if o.Rule == ThresholdGiven {
		rep.Notes = append(rep.Notes, "a decision threshold applies to two classes only; it was not used")
	}

	// The halves: A fits the calibration, B measures it and calibrates
	// the prediction sets.
	perm := rand.New(rand.NewPCG(o.Seed, 0x6361)).Perm(rows)
	var half [2][]int
	for i, r := range perm {
		half[i%2] = append(half[i%2], r)
	}
	if !o.NoCalibration {
		cal, err := fitCalibration(scores, truth, k, half[0])
		if err != nil {
			rep.Notes = append(rep.Notes, "no calibrated probabilities: "+err.Error())
		} else {
			d.Calibration = cal
		}
	}
	probs := func(r int, dst []float64, c *schema.Calibration) {
		s := scores[r*k : (r+1)*k]
		switch {
		case c == nil && two:
			dst[1] = (1 + max(-1, min(1, s[0]))) / 2
			dst[0] = 1 - dst[1]
		case c == nil:
			arith.Softmax(s, 1, dst)
		case two:
			dst[1] = calib.Platt{A: c.A, B: c.B}.Prob(s[0])
			dst[0] = 1 - dst[1]
		default:
			arith.Softmax(s, c.Temperature, dst)
		}
	}
	width := max(k, 2)
	p := make([]float64, width)
	top := func(c *schema.Calibration, rowsOf []int) (conf []float64, correct []bool) {
		for _, r := range rowsOf {
			probs(r, p, c)
			j := 0
			for i := range p {
				if p[i] > p[j] {
					j = i
				}
			}
			conf, correct = append(conf, p[j]), append(correct, j == truth[r])
		}
		return conf, correct
	}
	if d.Calibration != nil {
		conf, correct := top(d.Calibration, half[1])
		rep.ECE = calib.ECE(conf, correct, 15)
		conf, correct = top(nil, half[1])
		rep.RawECE = calib.ECE(conf, correct, 15)
	}
	if o.Coverage > 0 {
		if d.Calibration == nil {
			rep.Notes = append(rep.Notes, "no prediction sets: they need calibrated probabilities")
		} else {
			fitSets(d, rep, o.Coverage, half[1], truth, width, func(r int, dst []float64) { probs(r, dst, d.Calibration) })
		}
	}
	if o.TargetError > 0 {
		fitAbstain(d, rep, o.TargetError, scores, k, truth, threshold, cm.Scale())
	}
	if d.Threshold == nil && d.Calibration == nil && d.Sets == nil && d.Abstain == nil {
		return nil, rep, nil
	}
	return d, rep, nil
}

// fitCalibration fits Platt scaling (one signed score) or temperature
// scaling (several scores) on the rows in use.
func fitCalibration(scores []float64, truth []int, k int, use []int) (*schema.Calibration, error) {
	if k == 1 {
		s := make([]float64, len(use))
		pos := make([]bool, len(use))
		for i, r := range use {
			s[i], pos[i] = scores[r], truth[r] == 1
		}
		pl, err := calib.FitPlatt(s, pos)
		if err != nil {
			return nil, err
		}
		if !(pl.A > 0) {
			return nil, errors.New("the scores do not rise with the second class on the validation rows")
		}
		return &schema.Calibration{Kind: schema.CalibrationPlatt, A: pl.A, B: pl.B}, nil
	}
	s := make([]float64, 0, len(use)*k)
	lab := make([]int, len(use))
	for i, r := range use {
		s = append(s, scores[r*k:(r+1)*k]...)
		lab[i] = truth[r]
	}
	t, err := calib.FitTemperature(s, k, lab)
	if err != nil {
		return nil, err
	}
	return &schema.Calibration{Kind: schema.CalibrationTemperature, Temperature: t}, nil
}

// calibMetric is the metric a threshold is chosen for: the ranking metric,
// or balanced accuracy for AUC, which no threshold changes.
func calibMetric(m Metric) calib.Metric {
	switch m {
	case Accuracy:
		return calib.Accuracy
	case MacroF1:
		return calib.MacroF1
	}
	return calib.Balanced
}

func metricName(m Metric) string {
	switch m {
	case Accuracy:
		return "accuracy"
	case MacroF1:
		return "macro-f1"
	}
	return "balanced"
}

// fitSets calibrates split-conformal prediction sets of the given coverage
// on the rows use, whose calibrated probabilities probs writes, and
// measures them there.
func fitSets(d *schema.Decision, rep *DecisionReport, coverage float64, use, truth []int, width int, probs func(r int, dst []float64)) {
	p := make([]float64, width)
	non := make([]float64, 0, len(use))
	for _, r := range use {
		probs(r, p)
		non = append(non, 1-p[truth[r]])
	}
	q := min(calib.ConformalThreshold(non, 1-coverage), 1)
	d.Sets = &schema.Sets{Coverage: coverage, Quantile: q}
	covered, size := 0, 0
	var set []int
	for _, r := range use {
		probs(r, p)
		set = arith.PredictionSet(p, q, set[:0])
		size += len(set)
		for _, j := range set {
			if j == truth[r] {
				covered++
			}
		}
	}
	rep.Coverage = float64(covered) / float64(len(use))
	rep.MeanSetSize = float64(size) / float64(len(use))
	if q >= 1 {
		rep.Notes = append(rep.Notes, fmt.Sprintf("with %d calibration rows, a coverage of %g puts every class in every set; ask for less coverage or give more validation rows", len(use), coverage))
	}
}

// fitAbstain chooses the reject option's margin floor on every validation
// row for the target error rate, and measures the rows it answers.
func fitAbstain(d *schema.Decision, rep *DecisionReport, target float64, scores []float64, k int, truth []int, threshold, rho float64) {
	rows := len(truth)
	margins := make([]float64, rows)
	correct := make([]bool, rows)
	for r := range rows {
		s := scores[r*k : (r+1)*k]
		margins[r] = arith.Gap(s, threshold) / rho
		correct[r] = arith.Decide(s, threshold) == truth[r]
	}
	tau, answered := calib.RejectThreshold(margins, correct, target)
	if math.IsInf(tau, 1) {
		rep.Notes = append(rep.Notes, fmt.Sprintf("no reject option: no margin floor keeps the error of the answered validation rows at or below %g", target))
		return
	}
	d.Abstain = &schema.Abstain{MarginFloor: max(tau, 0), TargetError: target, Answered: answered}
	wrong, n := 0, 0
	for r := range rows {
		if margins[r] >= d.Abstain.MarginFloor {
			n++
			if !correct[r] {
				wrong++
			}
		}
	}
	rep.Answered = float64(n) / float64(rows)
	if n > 0 {
		rep.AnsweredError = float64(wrong) / float64(n)
	}
}
