package calib

import (
	"fmt"
	"math"
	"slices"
)

// ConformalThreshold returns q̂, the split-conformal threshold at
// miscoverage α (Vovk, Gammerman and Shafer 2005; Angelopoulos and Bates
// 2021, arXiv:2107.07511, §1): with n calibration rows, the
// ⌈(n+1)(1−α)⌉-th smallest of their nonconformity scores, or +Inf when
// that rank exceeds n (too few rows for that α: every set then holds every
// class). Use Nonconformity for the scores and Set for the sets.
//
// The guarantee: if the calibration rows and a new row are exchangeable
// (for instance drawn independently from the same distribution), the set
// of the new row holds its true class with probability at least 1 − α,
// and at most 1 − α + 1/(n+1) when the scores have no ties. The
// probability is over the calibration rows and the new row together: it
// is a marginal guarantee, not one for each row or each class, and it
// fails when served rows drift away from the calibration rows.
//
// The rank is computed as ⌈x⌉ with x = (n+1)(1−α) taken 1e−12 relative
// below its float64 value, so that a decimal α such as 0.1 gives the rank
// its decimal value means (20·0.9 is 18, whatever the rounding of 0.9).
//
// It panics when α is not in (0, 1) or a score is NaN.
func ConformalThreshold(nonconformity []float64, alpha float64) float64 {
	if !(alpha > 0 && alpha < 1) {
		panic(fmt.Sprintf("calib: ConformalThreshold: α = %v, want 0 < α < 1", alpha))
	}
	n := len(nonconformity)
	x := float64(n+1) * (1 - alpha)
	r := int(math.Ceil(x - 1e-12*x))
	if r > n {
		return math.Inf(1)
	}
	s := slices.Clone(nonconformity)
	for i, v := range s {
		if math.IsNaN(v) {
			panic(fmt.Sprintf("calib: ConformalThreshold: nonconformity of row %d is NaN", i))
		}
	}
	slices.Sort(s)
	return s[max(r, 1)-1]
}

// Nonconformity appends to dst, for each row, 1 − p̂_y: one minus the
// probability given to the row's true class. probs holds k calibrated
// probabilities per row, row-major, and labels the true classes. It panics
// when the lengths do not match or a label is out of range.
func Nonconformity(probs []float64, k int, labels []int, dst []float64) []float64 {
	if k < 1 || len(probs) != k*len(labels) {
		panic(fmt.Sprintf("calib: Nonconformity: %d probabilities for %d labels of %d classes", len(probs), len(labels), k))
	}
	for i, y := range labels {
		if y < 0 || y >= k {
			panic(fmt.Sprintf("calib: Nonconformity: label %d of row %d is not in 0..%d", y, i, k-1))
		}
		dst = append(dst, 1-probs[i*k+y])
	}
	return dst
}

// Set appends to dst the prediction set of one row: every class y, in
// increasing order, whose nonconformity 1 − probs[y] is at most qhat, and
// returns the extended slice (pass dst[:0] to reuse a buffer). The set is
// empty when no class has probability at least 1 − qhat, and holds every
// class when qhat ≥ 1 (in particular +Inf).
func Set(probs []float64, qhat float64, dst []int) []int {
	for y, p := range probs {
		if 1-p <= qhat {
			dst = append(dst, y)
		}
	}
	return dst
}
