package calib

import (
	"cmp"
	"fmt"
	"math"
	"math/bits"
	"slices"
)

// Metric is what BestThreshold maximizes. The zero value is Accuracy.
// Rows of class 1 are the positives.
type Metric int

const (
	// Accuracy is the fraction of rows answered right.
	Accuracy Metric = iota
	// Balanced is balanced accuracy: the mean of the two classes'
	// recalls, (TP/P + TN/N)/2, or the one present class's recall.
	Balanced
	// F1 is the F1 of the positive class, 2TP/(2TP + FP + FN), taken
	// as 0 when that is 0/0.
	F1
	// MacroF1 is the mean over the classes present of each class's F1,
	// a class never predicted counting F1 = 0.
	MacroF1
)

// String names the metric.
func (m Metric) String() string {
	switch m {
	case Accuracy:
		return "accuracy"
	case Balanced:
		return "balanced accuracy"
	case F1:
		return "F1"
	case MacroF1:
		return "macro-F1"
	}
	return fmt.Sprintf("Metric(%d)", int(m))
}

// Counts tallies two-class answers, class 1 being the positive one.
type Counts struct{ TP, FP, TN, FN int }

// Value returns the metric on these counts (definitions common practice,
// no source), NaN with no rows.
func (c Counts) Value(m Metric) float64 {
	num, den := c.fraction(m)
	if den == 0 {
		return math.NaN()
	}
	return float64(num) / float64(den)
}

// fraction returns the metric as num/den in integers, so that thresholds
// are compared exactly (den = 0 with no rows). Every term stays below
// 8n², within uint64 for n below 10⁹.
func (c Counts) fraction(m Metric) (num, den uint64) {
	tp, fp, tn, fn := uint64(c.TP), uint64(c.FP), uint64(c.TN), uint64(c.FN)
	pos, neg := tp+fn, tn+fp
	switch m {
	case Accuracy:
		return tp + tn, pos + neg
	case Balanced:
		switch {
		case pos > 0 && neg > 0:
			return tp*neg + tn*pos, 2 * pos * neg
		case pos > 0:
			return tp, pos
		default:
			return tn, neg
		}
	case F1:
		if 2*tp+fp+fn == 0 {
			if pos+neg == 0 {
				return 0, 0
			}
			return 0, 1
		}
		return 2 * tp, 2*tp + fp + fn
	case MacroF1:
		a, b := 2*tp, 2*tp+fp+fn // positive class's F1 = a/b
		e, f := 2*tn, 2*tn+fp+fn // negative class's F1 = e/f
		switch {
		case pos > 0 && neg > 0:
			return a*f + e*b, 2 * b * f
		case pos > 0:
			return a, b
		case neg > 0:
			return e, f
		}
		return 0, 0
	}
	panic(fmt.Sprintf("calib: unknown metric %d", int(m)))
}

// better reports whether a/b > c/d, exactly (128-bit products).
func better(a, b, c, d uint64) bool {
	h1, l1 := bits.Mul64(a, d)
	h2, l2 := bits.Mul64(c, b)
	return h1 > h2 || (h1 == h2 && l1 > l2)
}

// ThresholdValue tallies the rows answered with the rule "class 1 when
// s > t" and returns the counts and the metric's value (NaN with no
// rows). positive[i] says whether row i's true class is class 1. It
// panics when the slices differ in length.
func ThresholdValue(scores []float64, positive []bool, metric Metric, t float64) (Counts, float64) {
	if len(scores) != len(positive) {
		panic(fmt.Sprintf("calib: ThresholdValue: %d scores but %d labels", len(scores), len(positive)))
	}
	var c Counts
	for i, s := range scores {
		switch {
		case s > t && positive[i]:
			c.TP++
		case s > t:
			c.FP++
		case positive[i]:
			c.FN++
		default:
			c.TN++
		}
	}
	return c, c.Value(metric)
}

// BestThreshold chooses the decision threshold t of a two-class model on
// validation rows: the model answers class 1 when its signed score s > t,
// and t maximizes metric on the rows (positive[i]: row i is of class 1).
// It returns t and the metric's value there.
//
// The candidates are t = 0 (the untuned rule), the midpoints between
// consecutive distinct scores (a/2 + b/2, or a when that rounds onto a or
// b), −Inf (every row class 1) and +Inf (every row class 0); between them
// they give every distinct answer a threshold can give. Among candidates of
// equal value (compared exactly, as fractions of integers) the one nearest
// 0 wins, and of two equally near the lower; so t = 0 is returned whenever
// the untuned rule is as good as any. Sorting makes it O(n log n).
//
// A threshold chosen on the validation rows flatters them; measure it on
// other rows. With no rows it returns (0, NaN). It panics when the slices
// differ in length or a score is NaN or infinite.
func BestThreshold(scores []float64, positive []bool, metric Metric) (t, value float64) {
	if len(scores) != len(positive) {
		panic(fmt.Sprintf("calib: BestThreshold: %d scores but %d labels", len(scores), len(positive)))
	}
	n := len(scores)
	if n == 0 {
		return 0, math.NaN()
	}
	order := make([]int, n)
	var c Counts // every row answered class 1: t below every score
	for i, s := range scores {
		if !finite(s) {
			panic(fmt.Sprintf("calib: BestThreshold: score of row %d is %v", i, s))
		}
		order[i] = i
		if positive[i] {
			c.TP++
		} else {
			c.FP++
		}
	}
	slices.SortFunc(order, func(a, b int) int { return cmp.Compare(scores[a], scores[b]) })
	// Interval j of thresholds, [lo, hi), gives one answer for every t in
	// it; lo = −Inf for the first, hi = +Inf for the last.
	bestT := math.NaN()
	var bestNum, bestDen uint64
	consider := func(lo, hi float64) {
		var rep float64
		switch {
		case lo <= 0 && 0 < hi:
			rep = 0
		case math.IsInf(lo, -1):
			rep = lo
		case math.IsInf(hi, 1):
			rep = hi
		default:
			rep = lo/2 + hi/2
			if rep <= lo || rep >= hi {
				rep = lo
			}
		}
		num, den := c.fraction(metric)
		if math.IsNaN(bestT) || better(num, den, bestNum, bestDen) ||
			(!better(bestNum, bestDen, num, den) && math.Abs(rep) < math.Abs(bestT)) {
			bestT, bestNum, bestDen = rep, num, den
		}
	}
	lo := math.Inf(-1)
	for i := 0; i < n; {
		hi := scores[order[i]]
		consider(lo, hi)
		// Rows scoring hi are answered class 0 once t ≥ hi.
		for ; i < n && scores[order[i]] == hi; i++ {
			if positive[order[i]] {
				c.TP--
				c.FN++
			} else {
				c.FP--
				c.TN++
			}
		}
		lo = hi
	}
	consider(lo, math.Inf(1))
	return bestT, float64(bestNum) / float64(bestDen)
}
