package recipe_test

import (
	"bytes"
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/optim/modelfile"
	"github.com/rhomb/rhomb/optim/recipe"
)

// irisTwo is the versicolor/virginica part of Iris, the pair that
// overlaps (REFERENCES.md: Fisher's Iris), by the two sepal measurements
// only, where the two species overlap most (common practice, no source),
// as a one-output ±1 set split 60/40.
func irisTwo(t *testing.T) (train, val *data.Set[float64]) {
	t.Helper()
	all, _, _ := iris(t)
	var rows []int
	for r := range all.Rows {
		if all.Class(r) > 0 {
			rows = append(rows, r)
		}
	}
	two := &data.Set[float64]{Rows: len(rows), Features: 2, Outputs: 1, Classes: []string{"versicolor", "virginica"}}
	for _, r := range rows {
		two.X = append(two.X, all.X[r*4:r*4+2]...)
		two.Y = append(two.Y, map[int]float64{1: -1, 2: 1}[all.Class(r)])
	}
	parts, err := recipe.SplitRows(two.Labels(), 0.4, 0, 1)
	if err != nil {
		t.Fatal(err)
	}
	return two.Subset(parts[0]), two.Subset(parts[1])
}

// TestFitDecision fits every map on real rows and checks what holds by
// construction, through a saved and re-read model file: the chosen
// threshold's balanced accuracy on the validation rows is at least the
// untuned rule's (it maximizes it over every cut); the prediction sets
// cover at least the asked share of their calibration rows (the conformal
// quantile's rank rule, Angelopoulos and Bates 2021, §1); the answered
// validation rows' error is at most the target (the floor is chosen so);
// and the served model applies the maps it was given.
func TestFitDecision(t *testing.T) {
	train, val := irisTwo(t)
	f, err := recipe.Fit(context.Background(), train, val, recipe.Plan{Hidden: []int{8}, Seed: 1}, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	file := &modelfile.Model[float64]{Network: f.Network, Normalized: f.Normalized, Classes: train.Classes}
	d, rep, err := recipe.FitDecision(file, val, recipe.DecisionOptions{Rule: recipe.ThresholdForMetric, Metric: recipe.Balanced, Coverage: 0.8, TargetError: 0.05, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("%+v", rep)
	if d == nil || d.Threshold == nil || d.Calibration == nil {
		t.Fatalf("decision %+v: want a threshold and a calibration", d)
	}
	// The figures must leave room for the checks below to fail.
	if rep.AtZero > 0.95 || rep.Answered == 1 {
		t.Fatalf("the rows are too easy for this test: %+v", rep)
	}
	if rep.AtThreshold < rep.AtZero {
		t.Errorf("balanced accuracy %v at the chosen threshold, %v at 0: the search missed a better cut", rep.AtThreshold, rep.AtZero)
	}
	if d.Sets != nil && rep.Coverage < 0.8 {
		t.Errorf("the sets cover %v of their calibration rows, below 0.8", rep.Coverage)
	}
	if d.Abstain != nil && rep.AnsweredError > 0.05 {
		t.Errorf("answered validation rows err %v, above the 0.05 target", rep.AnsweredError)
	}
	file.Decision = d
	var b bytes.Buffer
	if err := modelfile.Write(&b, file); err != nil {
		t.Fatal(err)
	}
	c, err := classify.Read(b.Bytes(), "decided")
	if err != nil {
		t.Fatal(err)
	}
	answers := make([]classify.Answer, val.Rows)
	if err := c.ClassifyVectors(nil, val.X, val.Rows, answers); err != nil {
		t.Fatal(err)
	}
	for r, a := range answers {
		if want := a.Scores[0] > *d.Threshold; (a.Class == 1) != want {
			t.Fatalf("row %d: score %v, threshold %v, class %d", r, a.Scores[0], *d.Threshold, a.Class)
		}
		if p := a.Probabilities; p == nil || math.Abs(p[0]+p[1]-1) > 1e-15 {
			t.Fatalf("row %d: probabilities %v", r, p)
		}
	}
}

// TestFitDecisionRefuses: levels outside (0, 1) are errors.
func TestFitDecisionRefuses(t *testing.T) {
	train, val := irisTwo(t)
	f, err := recipe.Fit(context.Background(), train, val, recipe.Plan{Hidden: []int{4}, Epochs: 3, Seed: 1}, false, nil)
	if err != nil {
		t.Fatal(err)
	}
	file := &modelfile.Model[float64]{Network: f.Network, Normalized: f.Normalized, Classes: train.Classes}
	for _, o := range []recipe.DecisionOptions{{Coverage: 1.2}, {TargetError: -0.1}, {Rule: recipe.ThresholdGiven, Threshold: math.NaN()}} {
		if _, _, err := recipe.FitDecision(file, val, o); err == nil {
			t.Errorf("%+v: no error", o)
		}
	}
}
