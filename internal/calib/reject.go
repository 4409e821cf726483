package calib

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// RejectThreshold chooses a reject option on validation rows: the model
// answers a row whose margin is at least τ and abstains below it. margins[i]
// is row i's margin (any confidence where larger means surer: the gap
// between the largest and second-largest score, a signed score's distance
// from the threshold, the top calibrated probability) and correct[i]
// whether the model's answer for it was right.
//
// τ is the smallest of the given margins such that, among the rows with
// margin ≥ τ, the fraction answered wrongly is at most targetError, and
// answered is the fraction of all rows with margin ≥ τ. The error rate is
// not monotone in τ; the smallest qualifying τ is returned even when some
// larger τ does not qualify. Because τ is one of the validation margins, a
// served row with a margin below every validation row's is refused. When
// no τ reaches the target, τ = +Inf and answered = 0: answer nothing.
// With no rows, likewise. The comparison allows 1e−12 relative, so that a
// decimal target such as 0.29 with 29 errors in 100 rows qualifies.
//
// The rate is measured on the validation rows τ was chosen on: it is an
// estimate, not a guarantee, and the error rate on served rows will
// usually be somewhat higher, the more so the fewer rows are answered. See
// RejectThresholdBound for a stricter choice.
//
// It panics when the slices differ in length, a margin is NaN, or
// targetError is NaN or negative.
func RejectThreshold(margins []float64, correct []bool, targetError float64) (tau, answered float64) {
	if !(targetError >= 0) {
		panic(fmt.Sprintf("calib: RejectThreshold: target error %v", targetError))
	}
	return sweepReject(margins, correct, func(wrong, rows int) bool {
		return float64(wrong) <= targetError*float64(rows)*(1+1e-12)
	})
}

// RejectThresholdBound is RejectThreshold with the error rate replaced by
// its one-sided Clopper–Pearson upper confidence bound at the given
// confidence (such as 0.95; see ErrorUpperBound): τ is the smallest margin
// at which, among the rows with margin ≥ τ, the bound on the error rate is
// at most targetError. It refuses the few most confident rows alone as
// evidence (one right answer bounds the error rate only by confidence), so
// it answers fewer rows than RejectThreshold.
//
// The bound holds at each fixed τ; τ is still chosen by looking at the
// rows, among as many candidates as there are distinct margins, so the
// result is a stricter estimate, not a formal guarantee.
//
// It panics as RejectThreshold does, and when confidence is not in (0, 1).
func RejectThresholdBound(margins []float64, correct []bool, targetError, confidence float64) (tau, answered float64) {
	if !(targetError >= 0) {
		panic(fmt.Sprintf("calib: RejectThresholdBound: target error %v", targetError))
	}
	if !(confidence > 0 && confidence < 1) {
		panic(fmt.Sprintf("calib: RejectThresholdBound: confidence %v, want 0 < confidence < 1", confidence))
	}
	delta := 1 - confidence
	return sweepReject(margins, correct, func(wrong, rows int) bool {
		if targetError >= 1 {
			return true
		}
		if wrong >= rows {
			return false // the upper bound is 1
		}
		// The bound u solves P(X ≤ wrong | u) = δ for X ~ Bin(rows, u),
		// and P(X ≤ wrong | p) falls as p rises, so u ≤ target exactly
		// when P(X ≤ wrong | target) ≤ δ.
		return binomCDF(wrong, rows, targetError) <= delta
	})
}

// sweepReject returns the smallest margin τ at which ok(wrong, rows)
// holds for the rows with margin ≥ τ, and the fraction of rows answered.
func sweepReject(margins []float64, correct []bool, ok func(wrong, rows int) bool) (tau, answered float64) {
	if len(margins) != len(correct) {
		panic(fmt.Sprintf("calib: reject option: %d margins but %d outcomes", len(margins), len(correct)))
	}
	n := len(margins)
	order := make([]int, n)
	for i := range order {
		if math.IsNaN(margins[i]) {
			panic(fmt.Sprintf("calib: reject option: margin of row %d is NaN", i))
		}
		order[i] = i
	}
	slices.SortFunc(order, func(a, b int) int { return cmp.Compare(margins[b], margins[a]) })
	tau, answered = math.Inf(1), 0
	wrong := 0
	for i := 0; i < n; {
		m := margins[order[i]]
		for ; i < n && margins[order[i]] == m; i++ {
			if !correct[order[i]] {
				wrong++
			}
		}
		if ok(wrong, i) {
			tau, answered = m, float64(i)/float64(n)
		}
	}
	return tau, answered
}

// ErrorUpperBound is the one-sided Clopper–Pearson upper confidence bound
// on an error rate after wrong errors in rows rows (Clopper and Pearson
// 1934): the u with P(X ≤ wrong) = 1 − confidence for X ~ Binomial(rows,
// u), found by bisection on the binomial tail, which is computed as a
// regularized incomplete beta function (continued fraction, with
// math.Lgamma for the prefactor). It is 1 when wrong = rows, including
// rows = 0. It panics when confidence is not in (0, 1) or wrong is not in
// 0..rows.
func ErrorUpperBound(wrong, rows int, confidence float64) float64 {
	if !(confidence > 0 && confidence < 1) {
		panic(fmt.Sprintf("calib: ErrorUpperBound: confidence %v, want 0 < confidence < 1", confidence))
	}
	if wrong < 0 || wrong > rows {
		panic(fmt.Sprintf("calib: ErrorUpperBound: %d errors in %d rows", wrong, rows))
	}
	if wrong == rows {
		return 1
	}
	delta := 1 - confidence
	lo, hi := float64(wrong)/float64(rows), 1.0
	for range 200 {
		mid := lo + (hi-lo)/2
		if mid <= lo || mid >= hi {
			break
		}
		if binomCDF(wrong, rows, mid) > delta {
			lo = mid
		} else {
			hi = mid
		}
	}
	return hi
}

// binomCDF is P(X ≤ k) for X ~ Binomial(n, p), 0 ≤ k < n:
// I_{1−p}(n − k, k + 1).
func binomCDF(k, n int, p float64) float64 {
	return regIncBeta(float64(n-k), float64(k+1), 1-p, p)
}

// regIncBeta is the regularized incomplete beta function I_x(a, b) for
// a, b > 0, given x and y = 1 − x separately so that neither loses digits
// to a subtraction. It evaluates the continued fraction of I_x(a, b) (or
// of I_y(b, a) and takes its complement) by the modified Lentz method,
// choosing the side where the fraction converges fast, x < (a+1)/(a+b+2)
// (the standard textbook scheme, from memory).
func regIncBeta(a, b, x, y float64) float64 {
	if x <= 0 {
		return 0
	}
	if y <= 0 {
		return 1
	}
	la, _ := math.Lgamma(a)
	lb, _ := math.Lgamma(b)
	lab, _ := math.Lgamma(a + b)
	front := math.Exp(lab - la - lb + a*math.Log(x) + b*math.Log(y))
	if x < (a+1)/(a+b+2) {
		return front * betaFraction(a, b, x) / a
	}
	return 1 - front*betaFraction(b, a, y)/b
}

// betaFraction evaluates the continued fraction
// 1/(1+ d₁/(1+ d₂/(1+ …))) of the incomplete beta function, with
// d_{2m+1} = −(a+m)(a+b+m)x/((a+2m)(a+2m+1)) and
// d_{2m} = m(b−m)x/((a+2m−1)(a+2m)), by the modified Lentz method.
func betaFraction(a, b, x float64) float64 {
	const tiny = 1e-300
	guard := func(v float64) float64 {
		if math.Abs(v) < tiny {
			return tiny
		}
		return v
	}
	c, d := 1.0, 1/guard(1-(a+b)*x/(a+1))
	h := d
	for m := 1; m <= 100000; m++ {
		fm := float64(m)
		num := fm * (b - fm) * x / ((a + 2*fm - 1) * (a + 2*fm))
		d = 1 / guard(1+num*d)
		c = guard(1 + num/c)
		h *= d * c
		num = -(a + fm) * (a + b + fm) * x / ((a + 2*fm) * (a + 2*fm + 1))
		d = 1 / guard(1+num*d)
		c = guard(1 + num/c)
		del := d * c
		h *= del
		if math.Abs(del-1) < 1e-15 {
			break
		}
	}
	return h
}
