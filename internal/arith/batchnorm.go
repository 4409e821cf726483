package arith

import "math"

// Batch normalization in inference form: a unit's value x becomes
//
//	y = (x − m)·a + s,   a = γ/√(v + ε),
//
// with m and v the unit's mean and variance, γ its scale (1 when the node
// learns none), s its shift (0 when none) and ε > 0. The training node's
// inference mode (package net), its training mode (with the batch's m
// and v) and the serving reader (package net/classify) all compute it
// with BatchNormFactor and BatchNormRow, in float64 from the values
// widened exactly, rounded to the element type once, so a model file gives
// the same bits in training's inference mode and in serving, for float32
// and float64 models alike.

// BatchNormEpsilon is the ε that batch-normalization nodes add to the
// variance unless told otherwise: 1e-5 (common practice, no source). It
// keeps the division finite for a unit whose values do not vary.
const BatchNormEpsilon = 1e-5

// BatchNormMomentum is the weight of the newest batch in the running mean
// and variance, r ← (1 − 0.1)·r + 0.1·b (common practice, no source).
const BatchNormMomentum = 0.1

// BatchNormFactor returns a = γ/√(v + ε), in float64.
func BatchNormFactor(gamma, variance, eps float64) float64 {
	return gamma / math.Sqrt(variance+eps)
}

// BatchNormRow writes y_j = (x_j − mean_j)·factor_j + shift_j for every
// unit j of one row (len(mean) of them), computed in float64 and rounded
// to T once. The product is converted explicitly, which the Go
// specification says rounds it, so no compiler fuses it with the sum into
// one multiply-add and the bits are the same on every architecture.
func BatchNormRow[T Float](x, y []T, mean, factor, shift []float64) {
	n := len(mean)
	x, y, factor, shift = x[:n], y[:n], factor[:n], shift[:n]
	for j, m := range mean {
		y[j] = T(float64((float64(x[j])-m)*factor[j]) + shift[j])
	}
}
