package calib

import (
	"fmt"
	"math"
)

// Platt is a fitted Platt scaling map from a two-class model's signed
// score s to the probability of the second class (index 1):
//
//	P(class 1 | s) = 1/(1 + exp(−(A·s + B)))
//
// The zero value maps every score to 1/2. A > 0 when larger scores go with
// the second class, as they should; A ≤ 0 on fitted rows means the scores
// do not separate the classes there.
type Platt struct{ A, B float64 }

// Prob returns P(class 1 | s), calling exp only on −|A·s + B| so that it
// cannot overflow; the arithmetic is the serving reader's, so training and
// serving agree to the bit.
func (p Platt) Prob(s float64) float64 {
	z := p.A*s + p.B
	e := math.Exp(-math.Abs(z))
	if z >= 0 {
		return 1 / (1 + e)
	}
	return e / (1 + e)
}

// FitPlatt fits Platt scaling to validation rows: scores[i] is row i's
// signed score and positive[i] whether its true class is the second one
// (index 1). It maximizes the likelihood of the regularized targets
// t₊ = (N₊ + 1)/(N₊ + 2) for rows of class 1 and t₋ = 1/(N₋ + 2) for rows
// of class 0 (Platt 1999), which keeps A and B finite even when the scores
// separate the classes, by Newton's method with a backtracking line search
// on numerically stable forms of log(1 + eᶻ), as Lin, Lin and Weng (2007,
// Machine Learning 68) recommend. The iteration stops when the squared
// Newton decrement gᵀH⁻¹g of the mean objective falls below 1e−20 (the
// objective is then within about 5e−21 of its minimum), when no step
// lowers the objective any more (the floor of rounding), or after 100
// steps.
//
// When every score is the same the scores say nothing about the class:
// FitPlatt returns A = 0 and B the log-odds of the mean target.
//
// Errors (an *Error): fewer than 2 rows (ErrTooFewRows); rows of one
// class only (ErrOneClass); a NaN or infinite score (ErrNotFinite, naming
// the row). It panics when the slices differ in length.
func FitPlatt(scores []float64, positive []bool) (Platt, error) {
	if len(scores) != len(positive) {
		panic(fmt.Sprintf("calib: FitPlatt: %d scores but %d labels", len(scores), len(positive)))
	}
	n := len(scores)
	if n < 2 {
		return Platt{}, &Error{Kind: ErrTooFewRows, Row: -1, Msg: fmt.Sprintf(
			"Platt scaling needs at least 2 validation rows, at least one of each class; it was given %d", n)}
	}
	np := 0
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, s := range scores {
		if !finite(s) {
			return Platt{}, &Error{Kind: ErrNotFinite, Row: i, Msg: fmt.Sprintf(
				"the score of validation row %d is %v; Platt scaling needs finite scores", i, s)}
		}
		if positive[i] {
			np++
		}
		lo, hi = min(lo, s), max(hi, s)
	}
	nn := n - np
	if np == 0 || nn == 0 {
		c := 0
		if np > 0 {
			c = 1
		}
		return Platt{}, &Error{Kind: ErrOneClass, Row: -1, Msg: fmt.Sprintf(
			"Platt scaling needs validation rows of both classes, but all %d rows are of class %d; "+
				"hold out more rows for validation, or check the labels", n, c)}
	}
	tPos := (float64(np) + 1) / (float64(np) + 2)
	tNeg := 1 / (float64(nn) + 2)
	target := func(i int) float64 {
		if positive[i] {
			return tPos
		}
		return tNeg
	}
	if lo == hi {
		m := (float64(np)*tPos + float64(nn)*tNeg) / float64(n)
		return Platt{A: 0, B: math.Log(m / (1 - m))}, nil
	}
	// f is the mean negative log-likelihood of the targets,
	// (1/n) Σ log(1 + e^z) − t·z with z = A·s + B, written so that exp is
	// only called on −|z|.
	f := func(a, b float64) float64 {
		var sum float64
		for i, s := range scores {
			z := a*s + b
			t := target(i)
			if z >= 0 {
				sum += (1-t)*z + math.Log1p(math.Exp(-z))
			} else {
				sum += -t*z + math.Log1p(math.Exp(z))
			}
		}
		return sum / float64(n)
	}
	a, b := 0.0, math.Log((float64(np)+1)/(float64(nn)+1))
	fa := f(a, b)
	for range 100 {
		// Gradient and Hessian of the mean: ∂/∂z = p − t, ∂²/∂z² = p(1 − p).
		var g1, g2, h11, h12, h22 float64
		for i, s := range scores {
			z := a*s + b
			e := math.Exp(-math.Abs(z))
			p, q := 1/(1+e), e/(1+e) // σ(z), 1 − σ(z) for z ≥ 0
			if z < 0 {
				p, q = q, p
			}
			d1, d2 := p-target(i), p*q
			g1 += s * d1
			g2 += d1
			h11 += s * s * d2
			h12 += s * d2
			h22 += d2
		}
		inv := 1 / float64(n)
		g1, g2, h11, h12, h22 = g1*inv, g2*inv, h11*inv, h12*inv, h22*inv
		// A ridge of 1e−12 (Lin, Lin and Weng's σ) keeps the Hessian
		// invertible when p(1 − p) underflows on far-out rows.
		h11 += 1e-12
		h22 += 1e-12
		det := h11*h22 - h12*h12
		da := -(h22*g1 - h12*g2) / det
		db := -(h11*g2 - h12*g1) / det
		gd := g1*da + g2*db // −(Newton decrement)²
		if !(-gd > 1e-20) {
			break
		}
		step, moved := 1.0, false
		for step >= 1e-10 {
			na, nb := a+step*da, b+step*db
			if fn := f(na, nb); fn < fa+1e-4*step*gd {
				a, b, fa, moved = na, nb, fn, true
				break
			}
			step /= 2
		}
		if !moved {
			break // at the floor of rounding: no step lowers f
		}
	}
	return Platt{A: a, B: b}, nil
}
