package score

import (
	"math"
	"math/rand/v2"
	"testing"
)

// mannWhitney counts, pair by pair, the positive–negative pairs in which
// the positive scores higher (ties one half): the U statistic, computed
// here independently of ROCAUC's ranks.
func mannWhitney(scores []float64, positive []bool) (u float64, pos, neg int) {
	for i := range scores {
		if !positive[i] {
			neg++
			continue
		}
		pos++
		for j := range scores {
			switch {
			case positive[j]:
			case scores[i] > scores[j]:
				u++
			case scores[i] == scores[j]:
				u += 0.5
			}
		}
	}
	return u, pos, neg
}

// TestROCAUCMannWhitney: on seeded random scores with many ties (values
// on a grid of 7), ROCAUC equals U/(n₊n₋) from pair counting (Hanley and
// McNeil 1982: the area is the Mann–Whitney statistic). Both are ratios
// of integers and half-integers below 2⁵³ divided once, so they agree to
// a few ulp; 1e-12 allows that. (Random scores: a property for any data.)
func TestROCAUCMannWhitney(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	for trial := range 50 {
		n := 2 + rng.IntN(200)
		scores := make([]float64, n)
		positive := make([]bool, n)
		for i := range scores {
			scores[i] = float64(rng.IntN(7))
			positive[i] = rng.Float64() < 0.3
		}
		u, pos, neg := mannWhitney(scores, positive)
		got := ROCAUC(scores, positive)
		if pos == 0 || neg == 0 {
			if !math.IsNaN(got) {
				t.Errorf("trial %d: one class only, AUC %v, want NaN", trial, got)
			}
			continue
		}
		if want := u / float64(pos*neg); math.Abs(got-want) > 1e-12 {
			t.Errorf("trial %d: AUC %v, Mann–Whitney %v", trial, got, want)
		}
	}
}

// TestROCAUCHanleyMcNeil reproduces the worked example of Hanley and
// McNeil (Radiology 143:29–36, 1982, Table 1; the counts and the area from
// memory, the area recomputed here by hand as U/(n₊n₋)): 109 CT images
// rated on a five-point scale from "definitely normal" (1) to "definitely
// abnormal" (5); the 58 normal images rated 33, 6, 6, 11, 2 times and the
// 51 abnormal ones 3, 2, 2, 11, 33 times; area 0.893.
func TestROCAUCHanleyMcNeil(t *testing.T) {
	normal := []int{33, 6, 6, 11, 2}
	abnormal := []int{3, 2, 2, 11, 33}
	var scores []float64
	var positive []bool
	for rating := range 5 {
		for range normal[rating] {
			scores, positive = append(scores, float64(rating+1)), append(positive, false)
		}
		for range abnormal[rating] {
			scores, positive = append(scores, float64(rating+1)), append(positive, true)
		}
	}
	got := ROCAUC(scores, positive)
	// By hand: U = Σ over ratings r of abnormal[r] × (normal
	// ratings below r + half of those equal) = 2642 of 51·58 = 2958
	// pairs: 0.89317…, which the paper rounds to 0.893.
	if want := 2642.0 / 2958; math.Abs(got-want) > 1e-12 || math.Abs(got-0.893) > 0.0005 {
		t.Errorf("AUC %v, want %v (0.893 in the paper)", got, want)
	}
}

// TestROCAUCClosedForms: scores that separate the classes give 1, reversed
// 0, all equal 1/2 (common practice, no source).
func TestROCAUCClosedForms(t *testing.T) {
	pos := []bool{false, false, true, true}
	for _, c := range []struct {
		scores []float64
		want   float64
	}{
		{[]float64{0.1, 0.2, 0.8, 0.9}, 1},
		{[]float64{0.9, 0.8, 0.2, 0.1}, 0},
		{[]float64{0.5, 0.5, 0.5, 0.5}, 0.5},
	} {
		if got := ROCAUC(c.scores, pos); got != c.want {
			t.Errorf("scores %v: AUC %v, want %v", c.scores, got, c.want)
		}
	}
}

// TestAveragePrecisionByHand: ranked by score, the rows are positive,
// negative, positive, negative; the positives are met at precision 1/1
// and 2/3, so the average precision is (1 + 2/3)/2 = 5/6 (worked by hand
// from the definition). With the two middle rows tied they enter
// together: precision 1/1, then 2/3 for the tied pair's positive.
func TestAveragePrecisionByHand(t *testing.T) {
	pos := []bool{true, false, true, false}
	if got, want := AveragePrecision([]float64{0.9, 0.8, 0.7, 0.6}, pos), 5.0/6; math.Abs(got-want) > 1e-15 {
		t.Errorf("AP %v, want %v", got, want)
	}
	if got, want := AveragePrecision([]float64{0.9, 0.7, 0.7, 0.6}, pos), 5.0/6; math.Abs(got-want) > 1e-15 {
		t.Errorf("tied: AP %v, want %v", got, want)
	}
	if got := AveragePrecision([]float64{0.9, 0.1}, []bool{false, false}); !math.IsNaN(got) {
		t.Errorf("no positives: AP %v, want NaN", got)
	}
}
