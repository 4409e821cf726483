package classify_test

import (
	"bytes"
	"errors"
	"math"
	"testing"

	"gonum.org/v1/gonum/floats"

	"github.com/rhomb/rhomb/net/classify"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/optim/modelfile"
)

func withDecision(t *testing.T, m *modelfile.Model[float64], d *schema.Decision) (*classify.Model, error) {
	t.Helper()
	c := *m
	c.Decision = d
	var b bytes.Buffer
	if err := modelfile.Write(&b, &c); err != nil {
		t.Fatal(err)
	}
	if _, err := modelfile.Read[float64](b.Bytes(), "d"); err != nil {
		cm, cerr := classify.Read(b.Bytes(), "d")
		if cerr == nil || cm != nil {
			t.Fatalf("the training reader refuses (%v), the serving reader accepts", err)
		}
		return nil, cerr
	}
	return classify.Read(b.Bytes(), "d")
}

// rhoOf is ∏‖W_k‖_F over the dense layers, computed with gonum's
// floats.Norm, independently of internal/arith.
func rhoOf(m *modelfile.Model[float64]) float64 {
	rho := 1.0
	for _, d := range m.Network.Dense() {
		rho *= floats.Norm(d.W.Value, 2)
	}
	return rho
}

// TestDecisionBinary: a threshold moves the answer, Platt scaling gives
// 1/(1 + exp(−(A·s + B))) (Platt 1999), a prediction set holds exactly the
// classes with 1 − p ≤ q (or, when none has, the most probable), and the model abstains exactly below its margin
// floor; the margin is |s − t|/ρ with ρ = ∏‖W_k‖_F computed here with
// gonum.
func TestDecisionBinary(t *testing.T) {
	split := demoSplit(t)
	set := binarySet(split.Train)
	m := build(t, kindCase{"relu", "per-layer", true, true}, set)
	plain := saveLoad(t, m)
	rho := rhoOf(m)
	if got := plain.Scale(); math.Abs(got-rho) > 1e-12*rho {
		t.Fatalf("Scale %v, gonum gives %v", got, rho)
	}
	thr := 0.1
	d := &schema.Decision{Threshold: &thr, ThresholdFor: "given",
		Calibration: &schema.Calibration{Kind: schema.CalibrationPlatt, A: 3, B: -0.2},
		Sets:        &schema.Sets{Coverage: 0.9, Quantile: 0.7},
		Abstain:     &schema.Abstain{MarginFloor: 0.05 / rho * 3, TargetError: 0.05, Answered: 0.8}}
	c, err := withDecision(t, m, d)
	if err != nil {
		t.Fatal(err)
	}
	w, wp := c.NewWork(), plain.NewWork()
	var moved, abstained, twoSets int
	for r := range set.Rows {
		x := set.X[r*set.Features : (r+1)*set.Features]
		base, err := plain.ClassifyVector(wp, x)
		if err != nil {
			t.Fatal(err)
		}
		a, err := c.ClassifyVector(w, x)
		if err != nil {
			t.Fatal(err)
		}
		s := a.Scores[0]
		if s != base.Scores[0] {
			t.Fatalf("row %d: the decision changed the score", r)
		}
		wantClass := 0
		if s > thr {
			wantClass = 1
		}
		if a.Class != wantClass {
			t.Fatalf("row %d: score %v, threshold %v: class %d", r, s, thr, a.Class)
		}
		if a.Class != base.Class {
			moved++
		}
		p1 := 1 / (1 + math.Exp(-(3*s - 0.2)))
		if math.Abs(a.Probabilities[1]-p1) > 4e-16 || math.Abs(a.Probabilities[0]+a.Probabilities[1]-1) > 2e-16 {
			t.Fatalf("row %d: probabilities %v, Platt gives %v", r, a.Probabilities, p1)
		}
		var want []int
		for j, p := range a.Probabilities {
			if 1-p <= 0.7 {
				want = append(want, j)
			}
		}
		if len(want) == 0 { // never empty: the most probable class
			want = []int{0}
			if a.Probabilities[1] > a.Probabilities[0] {
				want = []int{1}
			}
		}
		if len(want) != len(a.Set) || (len(want) > 0 && want[0] != a.Set[0]) {
			t.Fatalf("row %d: set %v, want %v (p = %v)", r, a.Set, want, a.Probabilities)
		}
		if len(a.Set) == 2 {
			twoSets++
		}
		margin := math.Abs(s-thr) / rho
		if math.Abs(a.Margin-margin) > 1e-12*margin+1e-300 {
			t.Fatalf("row %d: margin %v, want |s − t|/ρ = %v", r, a.Margin, margin)
		}
		if a.Abstained != (a.Margin < d.Abstain.MarginFloor) {
			t.Fatalf("row %d: margin %v, floor %v, abstained %v", r, a.Margin, d.Abstain.MarginFloor, a.Abstained)
		}
		if a.Abstained {
			abstained++
		}
	}
	// The test would pass vacuously if no row were near the threshold.
	if moved == 0 || abstained == 0 || abstained == set.Rows || twoSets == 0 {
		t.Fatalf("the decision did nothing visible: %d rows moved by the threshold, %d abstained, %d sets of two, of %d", moved, abstained, twoSets, set.Rows)
	}
}

// TestDecisionTemperature: several classes get softmax(s/T) (temperature
// scaling, Guo et al. 2017), computed here directly.
func TestDecisionTemperature(t *testing.T) {
	split := demoSplit(t)
	m := build(t, kindCase{"relu", "per-layer", true, false}, split.Train)
	c, err := withDecision(t, m, &schema.Decision{Calibration: &schema.Calibration{Kind: schema.CalibrationTemperature, Temperature: 0.3}})
	if err != nil {
		t.Fatal(err)
	}
	set := split.Train
	answers := make([]classify.Answer, set.Rows)
	if err := c.ClassifyVectors(nil, set.X, set.Rows, answers); err != nil {
		t.Fatal(err)
	}
	for r, a := range answers {
		var z float64
		for _, s := range a.Scores {
			z += math.Exp(s / 0.3)
		}
		for j, s := range a.Scores {
			if want := math.Exp(s/0.3) / z; math.Abs(a.Probabilities[j]-want) > 1e-14 {
				t.Fatalf("row %d class %d: %v, softmax gives %v", r, j, a.Probabilities[j], want)
			}
		}
		if a.Set != nil || a.Abstained {
			t.Fatalf("row %d: a set or an abstention without them in the file", r)
		}
	}
}

// TestDecisionRefused: maps that do not fit the model are refused by both
// readers alike.
func TestDecisionRefused(t *testing.T) {
	split := demoSplit(t)
	multi := build(t, kindCase{"relu", "per-layer", true, false}, split.Train)
	thr := 0.5
	for _, d := range []*schema.Decision{
		{Threshold: &thr}, // a threshold on a three-class model
		{Calibration: &schema.Calibration{Kind: schema.CalibrationPlatt, A: 1}},
		{Calibration: &schema.Calibration{Kind: schema.CalibrationTemperature, Temperature: -1}},
		{Sets: &schema.Sets{Coverage: 0.9, Quantile: 0.5}}, // sets without calibration
		{Calibration: &schema.Calibration{Kind: schema.CalibrationTemperature, Temperature: 1}, Sets: &schema.Sets{Coverage: 1.5, Quantile: 0.5}},
		{Abstain: &schema.Abstain{MarginFloor: -1, TargetError: 0.1}},
	} {
		if _, err := withDecision(t, multi, d); !errors.Is(err, classify.ErrHeader) {
			t.Errorf("%+v: %v, want a header error", d, err)
		}
	}
}
