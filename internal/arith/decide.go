package arith

import "math"

// Sigmoid returns 1/(1 + e^{−z}), calling exp only on −|z| so that it
// cannot overflow.
func Sigmoid(z float64) float64 {
	e := math.Exp(-math.Abs(z))
	if z >= 0 {
		return 1 / (1 + e)
	}
	return e / (1 + e)
}

// Softmax writes softmax(s/t) into dst (len(dst) ≥ len(s)):
// e^{(s_j − max s)/t}, normalized. Subtracting the largest score first
// keeps exp from overflowing. t must be positive. Calibration fitting
// (internal/calib), the run report and serving all call it, so training
// and serving agree to the bit.
func Softmax(s []float64, t float64, dst []float64) {
	m := math.Inf(-1)
	for _, v := range s {
		m = max(m, v)
	}
	var sum float64
	for j, v := range s {
		dst[j] = math.Exp((v - m) / t)
		sum += dst[j]
	}
	for j := range s {
		dst[j] /= sum
	}
}

// Norm returns the Frobenius norm of w, √Σw², summed in float64 in order.
// The product of the dense layers' norms is the scale ρ that normalized
// margins are divided by, in training's diagnostics and in serving alike.
func Norm[T Float](w []T) float64 {
	var s float64
	for _, v := range w {
		s += float64(v) * float64(v)
	}
	return math.Sqrt(s)
}

// Gap returns how far a row's scores are from a different answer: for one
// signed score s, |s − threshold|; for several, the largest score minus
// the second largest. Divided by ρ it is the row's normalized margin.
func Gap(s []float64, threshold float64) float64 {
	if len(s) == 1 {
		return math.Abs(s[0] - threshold)
	}
	first, second := math.Inf(-1), math.Inf(-1)
	for _, v := range s {
		if v > first {
			first, second = v, first
		} else if v > second {
			second = v
		}
	}
	return first - second
}

// Decide returns the class a row's scores answer: for one signed score,
// 1 when it is above threshold and 0 otherwise; for several, the first
// index of the largest score (the training library's rule, data.ClassOf,
// with threshold 0).
func Decide(s []float64, threshold float64) int {
	if len(s) == 1 {
		if s[0] > threshold {
			return 1
		}
		return 0
	}
	c := 0
	for j, v := range s {
		if v > s[c] {
			c = j
		}
	}
	return c
}

// PredictionSet appends to dst the classes of a split-conformal
// prediction set at quantile q: every class j with 1 − p_j ≤ q (Vovk et
// al. 2005, in the form of Angelopoulos and Bates 2021, §1; from memory),
// and, when no class qualifies, the most probable one, so that a set is
// never empty. Adding a class only makes a set larger, so the coverage
// guarantee of the textbook set still holds.
func PredictionSet(p []float64, q float64, dst []int) []int {
	n := len(dst)
	top := 0
	for j, pj := range p {
		if 1-pj <= q {
			dst = append(dst, j)
		}
		if pj > p[top] {
			top = j
		}
	}
	if len(dst) == n {
		dst = append(dst, top)
	}
	return dst
}
