package score

import (
	"math"
	"sort"
)

// ROCAUC is the area under the ROC curve of scores for a two-class
// problem: the probability that a positive row scores above a negative
// one, ties counting one half. It equals the Mann–Whitney U statistic of
// the positive rows' scores against the negative rows' divided by
// n₊n₋ (Hanley and McNeil, Radiology 1982). It is computed from the
// ranks in O(n log n): the positives' rank sum, tied scores sharing the
// mean of their ranks, gives U = R₊ − n₊(n₊+1)/2. NaN when either class
// has no rows or a score is NaN.
func ROCAUC(scores []float64, positive []bool) float64 {
	n := len(scores)
	if len(positive) != n {
		panic("score: ROCAUC: scores and labels differ in length")
	}
	idx := make([]int, n)
	for i := range idx {
		if math.IsNaN(scores[i]) {
			return math.NaN()
		}
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return scores[idx[a]] < scores[idx[b]] })
	var rankSum float64
	pos := 0
	for i := 0; i < n; {
		j := i
		for j < n && scores[idx[j]] == scores[idx[i]] {
			j++
		}
		mid := float64(i+j+1) / 2 // the mean of ranks i+1 … j
		for k := i; k < j; k++ {
			if positive[idx[k]] {
				rankSum += mid
				pos++
			}
		}
		i = j
	}
	neg := n - pos
	if pos == 0 || neg == 0 {
		return math.NaN()
	}
	u := rankSum - float64(pos)*float64(pos+1)/2
	return u / (float64(pos) * float64(neg))
}

// AveragePrecision summarizes the precision–recall curve of scores for a
// two-class problem as the mean, over the positive rows, of the precision
// among the rows scoring at least as high as that row (the step-wise area
// under the precision–recall curve; common practice, no source). Rows
// with tied scores enter together. NaN with no positive row or a NaN
// score.
func AveragePrecision(scores []float64, positive []bool) float64 {
	n := len(scores)
	if len(positive) != n {
		panic("score: AveragePrecision: scores and labels differ in length")
	}
	idx := make([]int, n)
	for i := range idx {
		if math.IsNaN(scores[i]) {
			return math.NaN()
		}
		idx[i] = i
	}
	sort.Slice(idx, func(a, b int) bool { return scores[idx[a]] > scores[idx[b]] })
	total := 0
	for _, p := range positive {
		if p {
			total++
		}
	}
	if total == 0 {
		return math.NaN()
	}
	var sum float64
	tp, seen := 0, 0
	for i := 0; i < n; {
		j := i
		gained := 0
		for j < n && scores[idx[j]] == scores[idx[i]] {
			if positive[idx[j]] {
				gained++
			}
			j++
		}
		tp += gained
		seen = j
		sum += float64(gained) * float64(tp) / float64(seen)
		i = j
	}
	return sum / float64(total)
}
