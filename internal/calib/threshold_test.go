package calib

import (
	"math"
	"math/big"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestBestThresholdHand(t *testing.T) {
	// Worked by hand. Scores and classes (1 = positive):
	//   −2:0  −1:1  −0.5:0  0.5:0  1:1  3:1   (P = N = 3)
	// Thresholds by interval of t, with the rule "class 1 when s > t":
	//   t < −2          TP3 FP3 TN0 FN0  acc 3/6  bal 1/2  F1 6/9
	//   [−2, −1)  −1.5  TP3 FP2 TN1 FN0  acc 4/6  bal 2/3  F1 6/8
	//   [−1, −0.5) −.75 TP2 FP2 TN1 FN1  acc 3/6  bal 1/2  F1 4/7
	//   [−0.5, 0.5) 0   TP2 FP1 TN2 FN1  acc 4/6  bal 2/3  F1 4/6
	//   [0.5, 1)  0.75  TP2 FP0 TN3 FN1  acc 5/6  bal 5/6  F1 4/5
	//   [1, 3)    2     TP1 FP0 TN3 FN2  acc 4/6  bal 2/3  F1 2/4
	//   t ≥ 3     +Inf  TP0 FP0 TN3 FN3  acc 3/6  bal 1/2  F1 0
	// Macro-F1 at 0.75: (4/5 + 6/7)/2 = 29/35; no other interval comes near.
	scores := []float64{1, -2, 3, -0.5, 0.5, -1}
	positive := []bool{true, false, true, false, false, true}
	for _, c := range []struct {
		m        Metric
		t, value float64
	}{
		{Accuracy, 0.75, 5.0 / 6}, {Balanced, 0.75, 5.0 / 6}, {F1, 0.75, 0.8}, {MacroF1, 0.75, 29.0 / 35},
	} {
		if tt, v := BestThreshold(scores, positive, c.m); tt != c.t || v != c.value {
			t.Errorf("%v: t = %v, value %v; want %v, %v", c.m, tt, v, c.t, c.value)
		}
	}
	// The untuned rule on the same rows (the row [−0.5, 0.5) above).
	if cnt, v := ThresholdValue(scores, positive, Accuracy, 0); cnt != (Counts{TP: 2, FP: 1, TN: 2, FN: 1}) || v != 4.0/6 {
		t.Errorf("at 0: %+v, %v; want TP2 FP1 TN2 FN1, 4/6", cnt, v)
	}

	// Ties go to the threshold nearest 0 (worked by hand):
	// −3:1 −1:0 1:1 2:0: accuracy 2/4 at −Inf, at 0 (interval [−1, 1)) and
	// at +Inf, 1/4 elsewhere → t = 0.
	if tt, v := BestThreshold([]float64{-3, -1, 1, 2}, []bool{true, false, true, false}, Accuracy); tt != 0 || v != 0.5 {
		t.Errorf("tie with 0: t = %v, value %v; want 0, 0.5", tt, v)
	}
	// 1:0 2:1 3:0 4:1: accuracy 3/4 at 1.5 and at 3.5 → 1.5, the nearer.
	if tt, v := BestThreshold([]float64{1, 2, 3, 4}, []bool{false, true, false, true}, Accuracy); tt != 1.5 || v != 0.75 {
		t.Errorf("tie: t = %v, value %v; want 1.5, 0.75", tt, v)
	}
	// −2:0 −1:1 1:0 2:1: accuracy 3/4 at −1.5 and at 1.5, equally near 0
	// → the lower, −1.5.
	if tt, v := BestThreshold([]float64{-2, -1, 1, 2}, []bool{false, true, false, true}, Accuracy); tt != -1.5 || v != 0.75 {
		t.Errorf("symmetric tie: t = %v, value %v; want -1.5, 0.75", tt, v)
	}
	if tt, v := BestThreshold(nil, nil, Accuracy); tt != 0 || !math.IsNaN(v) {
		t.Errorf("no rows: %v, %v; want 0, NaN", tt, v)
	}
}

// ratMetric is the metric on counts in exact rational arithmetic, from the
// definitions (common practice, no source): accuracy (TP+TN)/n; balanced
// accuracy the mean recall over the classes present; F1 2TP/(2TP+FP+FN),
// 0 for 0/0; macro-F1 the mean F1 over the classes present.
func ratMetric(m Metric, tp, fp, tn, fn int64) *big.Rat {
	f1 := func(tp, fp, fn int64) *big.Rat {
		if 2*tp+fp+fn == 0 {
			return new(big.Rat)
		}
		return big.NewRat(2*tp, 2*tp+fp+fn)
	}
	pos, neg := tp+fn, tn+fp
	mean := func(a, b *big.Rat) *big.Rat {
		switch {
		case pos > 0 && neg > 0:
			s := new(big.Rat).Add(a, b)
			return s.Mul(s, big.NewRat(1, 2))
		case pos > 0:
			return a
		}
		return b
	}
	switch m {
	case Accuracy:
		return big.NewRat(tp+tn, pos+neg)
	case Balanced:
		var a, b *big.Rat
		if pos > 0 {
			a = big.NewRat(tp, pos)
		}
		if neg > 0 {
			b = big.NewRat(tn, neg)
		}
		return mean(a, b)
	case F1:
		return f1(tp, fp, fn)
	}
	return mean(f1(tp, fp, fn), f1(tn, fn, fp))
}

func TestBestThresholdBruteForce(t *testing.T) {
	// Property against an O(n²) search of the documented candidates: 0,
	// the midpoints between consecutive distinct scores, −Inf and +Inf,
	// each tallied directly and scored in exact rationals (math/big); the
	// best value wins, ties to the smallest |t|, then the lower t. Random
	// rows with many ties, zeros, and sometimes one class only.
	rng := rand.New(rand.NewPCG(31, 32))
	for trial := range 400 {
		n := 1 + rng.IntN(30)
		scores := make([]float64, n)
		positive := make([]bool, n)
		bias := rng.Float64()
		for i := range scores {
			scores[i] = float64(rng.IntN(13)-6) / 4
			positive[i] = rng.Float64() < bias+scores[i]/6
		}
		u := slices.Clone(scores)
		slices.Sort(u)
		u = slices.Compact(u)
		cands := []float64{0, math.Inf(-1), math.Inf(1)}
		for i := 1; i < len(u); i++ {
			mid := u[i-1]/2 + u[i]/2
			if mid <= u[i-1] || mid >= u[i] {
				mid = u[i-1]
			}
			cands = append(cands, mid)
		}
		for _, m := range []Metric{Accuracy, Balanced, F1, MacroF1} {
			var bestT float64
			var best *big.Rat
			for _, c := range cands {
				var tp, fp, tn, fn int64
				for i, s := range scores {
					switch {
					case s > c && positive[i]:
						tp++
					case s > c:
						fp++
					case positive[i]:
						fn++
					default:
						tn++
					}
				}
				v := ratMetric(m, tp, fp, tn, fn)
				if best == nil {
					best, bestT = v, c
					continue
				}
				switch cmp := v.Cmp(best); {
				case cmp > 0,
					cmp == 0 && math.Abs(c) < math.Abs(bestT),
					cmp == 0 && math.Abs(c) == math.Abs(bestT) && c < bestT:
					best, bestT = v, c
				}
			}
			want, _ := best.Float64()
			gotT, got := BestThreshold(scores, positive, m)
			if gotT != bestT || got != want {
				t.Fatalf("trial %d, %v, scores %v, positive %v: t = %v, value %v; brute force %v, %v",
					trial, m, scores, positive, gotT, got, bestT, want)
			}
			if _, v := ThresholdValue(scores, positive, m, gotT); v != want {
				t.Fatalf("trial %d, %v: ThresholdValue at %v = %v, want %v", trial, m, gotT, v, want)
			}
		}
	}
}
