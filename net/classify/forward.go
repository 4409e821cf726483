package classify

import (
	"github.com/rhomb/rhomb/internal/arith"
)

// The forward pass computes what the training library's does, in the
// model's own element type, with the one copy of the arithmetic both
// use (internal/arith), so the bits are the same by construction:
//
//   - A dense layer's output j is arith.Dot of the row and W's row j, the
//     rounding rule of every matrix product in training (arith.DotRows
//     computes four such outputs at a time, with the same bits).
//   - Batch normalization is arith.BatchNormRow with the stored running
//     mean and the factor arith.BatchNormFactor of the stored variance and
//     scale: the training node's inference mode calls the same two.
//   - ReLU is max(x, 0); the smoothed ReLU is arith.SmoothReLU and the
//     polynomial ReLU arith.Poly.Eval, both computed in float64 and
//     rounded to the element type once, as the training layers do.
//
// A float32 model rounds its float64 features to float32 first, as
// training does when it makes its float32 data set, and its scores are
// widened exactly to float64.
// (math.Exp, math.Log1p and math.Cos have per-architecture
// implementations, so smoothed and polynomial layers may still differ in
// the last bit between architectures; training and serving on one
// machine agree.)

type kind uint8

const (
	kindOne kind = iota
	kindDense
	kindReLU
	kindSmooth
	kindPoly
	kindBatchNorm
)

type layer struct {
	kind    kind
	in, out int
	w64     []float64   // dense: W, out×in row-major, in a float64 model
	w32     []float32   // dense: W in a float32 model
	beta    float64     // smooth-relu
	poly    *arith.Poly // poly-relu
	// batch-norm, per unit: the running mean, γ/√(var + ε) and the shift
	bnMean, bnFactor, bnShift []float64
}

// weights returns a dense layer's W in T.
func weights[T arith.Float](l *layer) []T {
	var z T
	if _, ok := any(z).(float32); ok {
		return any(l.w32).([]T)
	}
	return any(l.w64).([]T)
}

// forward runs one row x (len = features) through the layers, using a and
// b (each at least maxWidth long) as ping-pong buffers, and returns the
// output, which is a prefix of a or b.
func forward[T arith.Float](layers []layer, x, a, b []T) []T {
	cur := x
	for i := range layers {
		l := &layers[i]
		switch l.kind {
		case kindOne:
			y := a[:l.out]
			copy(y, cur)
			y[l.in] = 1
			cur, a, b = y, b, a
		case kindDense:
			y := a[:l.out]
			in := cur[:l.in]
			arith.DotRows(in, weights[T](l), y)
			cur, a, b = y, b, a
		case kindReLU:
			y := a[:len(cur)]
			for k, v := range cur {
				y[k] = max(v, 0)
			}
			cur, a, b = y, b, a
		case kindSmooth:
			y, bt := a[:len(cur)], l.beta
			for k, u := range cur {
				y[k] = T(arith.SmoothReLU(float64(u), bt))
			}
			cur, a, b = y, b, a
		case kindBatchNorm:
			y := a[:len(cur)]
			arith.BatchNormRow(cur, y, l.bnMean, l.bnFactor, l.bnShift)
			cur, a, b = y, b, a
		case kindPoly:
			y, p := a[:len(cur)], l.poly
			for k, v := range cur {
				y[k] = T(p.Eval(float64(v)))
			}
			cur, a, b = y, b, a
		}
	}
	return cur
}

// scores runs the feature row x through the network in the model's
// element type and writes the outputs, widened to float64, into dst.
func (m *Model) scores(w *Work, x, dst []float64) {
	if m.dtype == "float32" {
		x32 := w.x32[:len(x)]
		for i, v := range x {
			x32[i] = float32(v)
		}
		out := forward(m.layers, x32, w.a32, w.b32)
		for i, v := range out {
			dst[i] = float64(v)
		}
		return
	}
	copy(dst, forward(m.layers, x, w.a, w.b))
}
