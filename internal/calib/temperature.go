package calib

import (
	"fmt"
	"math"
)

// The range FitTemperature searches, on 1/T.
const (
	minInvT = 1e-4
	maxInvT = 1e4
)

// FitTemperature fits temperature scaling to validation rows: scores holds
// k scores per row, row-major (len(scores) = k·len(labels)), and labels
// the true classes. It returns the T > 0 that minimizes the mean negative
// log-likelihood of softmax(s/T) (Guo, Pleiss, Sun and Weinberger 2017,
// ICML). Dividing by T changes the probabilities, never the arg-max.
//
// The objective is convex in β = 1/T (a log-sum-exp of functions linear in
// β, less a linear term), so its derivative is nondecreasing in β.
// FitTemperature brackets the root of the derivative by bisection on
// log β over β ∈ [1e−4, 1e4], then polishes it with Newton steps kept
// inside the bracket, to about 1e−14 relative.
//
// T is clamped to [1e−4, 1e4]. A T at either end means the rows did not pin
// it down: rows that are all right with wide margins push T toward 0 (the
// likelihood keeps rising as the probabilities sharpen); scores unrelated
// to the labels, or every row's scores equal, push it toward +∞. For two
// classes with one signed score use FitPlatt; softmax((0, s)/T) is
// σ(s/T), Platt scaling with B = 0.
//
// Errors (an *Error): no rows (ErrTooFewRows); a NaN or infinite score
// (ErrNotFinite) or a label outside 0..k−1 (ErrLabel), naming the row. It
// panics when k < 2 or the lengths do not match.
func FitTemperature(scores []float64, k int, labels []int) (float64, error) {
	if k < 2 {
		panic(fmt.Sprintf("calib: FitTemperature: k = %d; temperature scaling needs k ≥ 2 scores per row", k))
	}
	if len(scores) != k*len(labels) {
		panic(fmt.Sprintf("calib: FitTemperature: %d scores for %d labels of %d classes", len(scores), len(labels), k))
	}
	n := len(labels)
	if n == 0 {
		return 0, &Error{Kind: ErrTooFewRows, Row: -1, Msg: "temperature scaling needs validation rows; it was given none"}
	}
	for i, y := range labels {
		if y < 0 || y >= k {
			return 0, &Error{Kind: ErrLabel, Row: i, Msg: fmt.Sprintf(
				"validation row %d has label %d; labels must be class indices 0..%d", i, y, k-1)}
		}
		for _, v := range scores[i*k : (i+1)*k] {
			if !finite(v) {
				return 0, &Error{Kind: ErrNotFinite, Row: i, Msg: fmt.Sprintf(
					"a score of validation row %d is %v; temperature scaling needs finite scores", i, v)}
			}
		}
	}
	// deriv returns the first and second derivatives in β of the mean
	// NLL: (1/n) Σ E_p[z] − z_y and (1/n) Σ Var_p[z], p = softmax(βz).
	w := make([]float64, k)
	deriv := func(beta float64) (g, h float64) {
		for i, y := range labels {
			z := scores[i*k : (i+1)*k]
			m := math.Inf(-1)
			for _, v := range z {
				m = max(m, v)
			}
			var sum, mean float64
			for j, v := range z {
				w[j] = math.Exp(beta * (v - m))
				sum += w[j]
				mean += w[j] * (v - m)
			}
			mean /= sum
			var vr float64
			for j, v := range z {
				d := v - m - mean
				vr += w[j] * d * d
			}
			g += mean - (z[y] - m)
			h += vr / sum
		}
		return g / float64(n), h / float64(n)
	}
	lo, hi := minInvT, maxInvT
	if g, _ := deriv(lo); g >= 0 {
		return 1 / lo, nil
	}
	if g, _ := deriv(hi); g <= 0 {
		return 1 / hi, nil
	}
	// Bisection on log β until the bracket is within 0.1%.
	for hi > lo*1.001 {
		mid := math.Sqrt(lo * hi)
		if g, _ := deriv(mid); g < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	beta := math.Sqrt(lo * hi)
	for range 100 {
		g, h := deriv(beta)
		if g == 0 {
			break
		}
		if g < 0 {
			lo = beta
		} else {
			hi = beta
		}
		next := beta - g/h
		if !(h > 0) || !(next > lo && next < hi) {
			next = lo + (hi-lo)/2
		}
		if math.Abs(next-beta) <= 1e-14*beta || hi-lo <= 4e-16*beta {
			beta = next
			break
		}
		beta = next
	}
	return 1 / beta, nil
}
