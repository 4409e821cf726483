package loss

import "fmt"

// Weighted scales the per-row loss of Inner by a weight for the row's
// class, so that rare classes count more (data.ClassWeights gives balanced
// weights). With c_r the class of row r and w = Weights, it returns
//
//	(1/rows) Σ_r w[c_r]·ℓ_r,
//
// with ℓ_r the loss Inner gives row r alone, and writes the gradient of
// that into grad. The class of a row is read from its target as data.Set
// encodes it: the index of the largest target value (the first, on ties),
// or for one column, 1 when the target is positive and 0 otherwise.
//
// Every loss of this package is a mean over rows of a loss of each row
// alone, so Inner.Eval on one row (rows = 1) gives ℓ_r and its gradient,
// and with all weights 1 Weighted is Inner (up to the order of the float64
// sums). Weighted calls Inner once per row on sub-slices of out, target and
// grad, and allocates nothing. An Inner that couples rows of a batch would
// be evaluated wrongly.
//
// For T = float32 the gradient is rounded twice, once by Inner and once
// after weighting, rather than once as for the other losses; and it
// passes through the per-row gradient of Inner without the factor 1/rows,
// so an Inner gradient that is huge (Exponential on a margin below about
// −88) overflows float32 sooner.
//
// Eval panics when Inner is nil, when a row's class has no weight (c_r ≥
// len(Weights)) and on Inner's shape mistakes. Weights are not checked:
// negative weights give a loss that rewards errors.
type Weighted[T Float] struct {
	Inner   Func[T]
	Weights []float64
}

var (
	_ Func[float32] = Weighted[float32]{}
	_ Func[float64] = Weighted[float64]{}
)

// Name returns "weighted-" followed by the inner loss's name.
func (w Weighted[T]) Name() string {
	if w.Inner == nil {
		return "weighted"
	}
	return "weighted-" + w.Inner.Name()
}

// Eval returns the weighted mean over rows of the inner loss and writes its
// gradient, w[c_r]/rows times the gradient of ℓ_r, into grad.
func (w Weighted[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	if w.Inner == nil {
		panic("loss: weighted: Inner is nil; wrap a loss, e.g. Weighted[float32]{Inner: Square[float32]{}, Weights: ...}")
	}
	// The name is built only to panic with: concatenating it allocates.
	if n := rows * cols; rows < 1 || cols < 1 || len(out) < n || len(target) < n || (grad != nil && len(grad) < n) {
		checkShape(w.Name(), out, target, grad, rows, cols)
	}
	inv := 1 / float64(rows)
	var sum float64
	for r := range rows {
		o := out[r*cols : (r+1)*cols]
		y := target[r*cols : (r+1)*cols]
		c := argmax(y)
		if cols == 1 {
			c = 0
			if y[0] > 0 {
				c = 1
			}
		}
		if c >= len(w.Weights) {
			panic(fmt.Sprintf("loss: %s: row %d is of class %d but there are %d weights; give one weight per class", w.Name(), r, c, len(w.Weights)))
		}
		wr := w.Weights[c]
		var g []T
		if grad != nil {
			g = grad[r*cols : (r+1)*cols]
		}
		sum += wr * w.Inner.Eval(o, y, 1, cols, g)
		if g != nil {
			s := wr * inv
			for i, v := range g {
				g[i] = T(s * float64(v))
			}
		}
	}
	return sum * inv
}
