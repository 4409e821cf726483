// Package arith is the arithmetic that a model's forward pass is made of,
// written once: the rounding rule of a dense layer's sums, the smoothed
// and polynomial rectifiers, the fit of the polynomial, and batch
// normalization's inference form (batchnorm.go). Training (the
// layers of package net and the matrix kernels of internal/kern) and
// serving (package net/classify, the server and the edge program) both
// call it, so a model file gives the same bits in training and in serving
// by construction, not by keeping two copies alike.
//
// It imports only the standard library, so that the serving side stays
// small.
//
// # The rule of a dense layer's sums
//
// Output j of a dense layer is Σ_l x_l·w_l over the layer's inputs,
// computed in the element type T by one fixed rule:
//
//	for each block b = 0, 1, … of KBlock consecutive terms, in order:
//	    acc = 0; for l in the block, in order: acc = fma(x_l, w_l, acc)
//	    c = acc for the first block, c = c + acc for every later block
//
// where fma rounds once in T (math.FMA for float64, FMA32 for float32 —
// or, on amd64 processors with FMA, the processor's own single-precision
// multiply-add, which rounds the same way) and the addition rounds once
// in T. Dot is that rule; the assembly kernels of
// internal/kern are checked against it bit for bit.
package arith

import (
	"fmt"
	"math"
)

// Float is the set of element types rhomb computes in.
type Float interface{ float32 | float64 }

// KBlock is the length of the blocks of the rule above. It is part of the
// rounding rule, so every kernel and every reader uses this one value.
const KBlock = 256

// FMA32 is fused multiply-add in float32, rounded once. The product of two
// float32 values is exact in float64 (24 + 24 < 53 significant bits), and
// so is the error e of the float64 sum s = p + z (Knuth's TwoSum). Rounding
// s to odd (forcing its last bit to 1 when s is inexact) and then to
// float32 rounds the exact p + z correctly, because float64 carries more
// than 24 + 2 bits (Boldo and Melquiond, "Emulation of FMA and correctly
// rounded sums: proved algorithms using rounding to odd", IEEE Trans.
// Computers 57(4), 2008; from memory). The tests check it against
// math/big.
func FMA32(x, y, z float32) float32 {
	p := float64(float64(x) * float64(y)) // exact; the conversion forbids fusing it into the sum
	zz := float64(z)
	s := p + zz
	// TwoSum: e = (p + zz) − s exactly.
	bb := s - p
	e := (p - (s - bb)) + (zz - bb)
	if e != 0 && !math.IsInf(s, 0) {
		bits := math.Float64bits(s)
		if bits&1 == 0 {
			if (e > 0) == (s > 0) {
				bits++
			} else {
				bits--
			}
			s = math.Float64frombits(bits)
		}
	}
	return float32(s)
}

// FMA returns x·y + z rounded once in T.
func FMA[T Float](x, y, z T) T {
	switch a := any(x).(type) {
	case float32:
		return T(FMA32(a, any(y).(float32), any(z).(float32)))
	default:
		return T(math.FMA(float64(x), float64(y), float64(z)))
	}
}

// Dot returns Σ_l x_l·w_l by the rule in the package documentation.
// w must be at least as long as x.
func Dot[T Float](x, w []T) T {
	w = w[:len(x)]
	var c T
	if _, ok := any(c).(float32); ok {
		return T(dot32(any(x).([]float32), any(w).([]float32)))
	}
	return T(dot64(any(x).([]float64), any(w).([]float64)))
}

// DotRows sets y[j] = Dot(x, w[j·n : (j+1)·n]) for every j < len(y), n =
// len(x): a dense layer's outputs for one input row, w holding the
// layer's weights row by row. It computes four outputs at a time, each
// by exactly Dot's rule (so with Dot's bits): the four sums do not depend
// on one another, and interleaving them keeps the processor's
// multiply-add units busy where a single sum waits for each step's
// result before the next.
func DotRows[T Float](x, w, y []T) {
	n := len(x)
	if len(w) < len(y)*n {
		panic(fmt.Sprintf("arith: DotRows: %d weights for %d outputs of %d inputs", len(w), len(y), n))
	}
	var c T
	if _, ok := any(c).(float32); ok {
		dotRows(any(x).([]float32), any(w).([]float32), any(y).([]float32), block4x32, dot32)
		return
	}
	dotRows(any(x).([]float64), any(w).([]float64), any(y).([]float64), block4x64, dot64)
}

// dotRows is DotRows with the element type's sums: block4 returns the
// four sums of one block for the weight rows at w, w + stride, w +
// 2·stride and w + 3·stride, and dot is Dot for the outputs left over.
func dotRows[T Float](x, w, y []T, block4 func(x, w []T, stride int) [4]T, dot func(x, w []T) T) {
	n := len(x)
	j := 0
	for ; j+4 <= len(y); j += 4 {
		var c [4]T
		for b := 0; b < n; b += KBlock {
			a := block4(x[b:min(b+KBlock, n)], w[j*n+b:], n)
			if b == 0 {
				c = a
			} else {
				c[0], c[1], c[2], c[3] = c[0]+a[0], c[1]+a[1], c[2]+a[2], c[3]+a[3]
			}
		}
		y[j], y[j+1], y[j+2], y[j+3] = c[0], c[1], c[2], c[3]
	}
	for ; j < len(y); j++ {
		y[j] = dot(x, w[j*n:(j+1)*n])
	}
}

func block4x64(x, w []float64, stride int) [4]float64 {
	v0, v1, v2, v3 := w[:len(x)], w[stride:stride+len(x)], w[2*stride:2*stride+len(x)], w[3*stride:3*stride+len(x)]
	var a0, a1, a2, a3 float64
	for l, xl := range x {
		a0 = math.FMA(xl, v0[l], a0)
		a1 = math.FMA(xl, v1[l], a1)
		a2 = math.FMA(xl, v2[l], a2)
		a3 = math.FMA(xl, v3[l], a3)
	}
	return [4]float64{a0, a1, a2, a3}
}

func block4x32(x, w []float32, stride int) (a [4]float32) {
	v0, v1, v2, v3 := w[:len(x)], w[stride:stride+len(x)], w[2*stride:2*stride+len(x)], w[3*stride:3*stride+len(x)]
	if hasFMA && len(x) > 0 {
		fmaChain32x4(&x[0], &v0[0], len(x), stride, &a)
		return a
	}
	var a0, a1, a2, a3 float32
	for l, xl := range x {
		a0 = FMA32(xl, v0[l], a0)
		a1 = FMA32(xl, v1[l], a1)
		a2 = FMA32(xl, v2[l], a2)
		a3 = FMA32(xl, v3[l], a3)
	}
	return [4]float32{a0, a1, a2, a3}
}

func dot64(x, w []float64) float64 {
	var c float64
	for b := 0; b < len(x); b += KBlock {
		e := min(b+KBlock, len(x))
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

func dot32(x, w []float32) float32 {
	var c float32
	for b := 0; b < len(x); b += KBlock {
		e := min(b+KBlock, len(x))
		var acc float32
		if hasFMA {
			acc = fmaChain32(&x[b], &w[b], e-b, 0)
		} else {
			for l := b; l < e; l++ {
				acc = FMA32(x[l], w[l], acc)
			}
		}
		if b == 0 {
			c = acc
		} else {
			c += acc
		}
	}
	return c
}

// ReLU returns max(x, 0).
func ReLU[T Float](x T) T { return max(x, 0) }

// SmoothReLU returns log(1 + e^{βu})/β, computed as
// max(u, 0) + log1p(e^{−β|u|})/β so that exp only sees non-positive
// arguments: nothing overflows even when βu does, and the ReLU part is
// exact. Layers compute it in float64 whatever their element type and
// round the result to it once.
func SmoothReLU(u, beta float64) float64 {
	return max(u, 0) + math.Log1p(math.Exp(-beta*math.Abs(u)))/beta
}

// CheckSharpness reports whether β is a usable sharpness for a smoothed
// rectifier computing in T: finite, positive, and large enough that the
// value at 0, log(2)/β, does not overflow T.
func CheckSharpness[T Float](beta float64) error {
	if math.IsNaN(beta) || math.IsInf(beta, 0) || beta <= 0 {
		return fmt.Errorf("smooth ReLU sharpness β = %v: want a finite β > 0 (larger is closer to ReLU; the largest gap is log(2)/β, at 0)", beta)
	}
	if math.IsInf(float64(T(math.Ln2/beta)), 0) {
		return fmt.Errorf("smooth ReLU sharpness β = %v: too small, the value at 0, log(2)/β, overflows; use a β of order 1 or larger", beta)
	}
	return nil
}
