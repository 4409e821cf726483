package classify

import "math"

// kBlock is the length of the inner-dimension blocks of the training
// library's matrix product (internal/kern, kcBlock). It is part of that
// product's rounding rule, so it is part of this package's too.
const kBlock = 256

// dot returns output j of a dense layer, Σ_l x_l·w_l, rounded by the
// training library's rule (internal/kern, package documentation): for each
// block of kBlock consecutive terms, in order, acc = 0 and
// acc = fma(x_l, w_l, acc) term by term; the first block's acc is the
// result, and each later block's is added to it. math.FMA rounds once, on
// every architecture, so the rule gives the same bits everywhere.
func dot(x, w []float64) float64 {
	w = w[:len(x)]
	var c float64
	for b := 0; b < len(x); b += kBlock {
		e := min(b+kBlock, len(x))
		var acc float64
		for l := b; l < e; l++ {
			acc = math.FMA(x[l], w[l], acc)
		}
		if b == 0 {
			c = acc
		} else {
			c += acc
		}
	}
	return c
}

// dot32 is dot with float32 weights, widened exactly to float64.
func dot32(x []float64, w []float32) float64 {
	w = w[:len(x)]
	var c float64
	for b := 0; b < len(x); b += kBlock {
		e := min(b+kBlock, len(x))
		var acc float64
		for l := b; l < e; l++ {
			acc = math.FMA(x[l], float64(w[l]), acc)
		}
		if b == 0 {
			c = acc
		} else {
			c += acc
		}
	}
	return c
}
