package loss

import "math"

// CrossEntropy is the softmax cross-entropy
//
//	ℓ(f, y) = −Σ_j y_j log softmax(f)_j,  softmax(f)_j = exp(f_j) / Σ_k exp(f_k),
//
// on rows of cols ≥ 1 logits. Targets are one-hot for hard labels; any
// non-negative weights (smoothed labels, say) are accepted, and the rows
// need not sum to 1. The gradient is (softmax(f)·Σ_j y_j − y)/rows.
//
// The log-sum-exp is computed as m + log1p(Σ_{k≠k*} exp(f_k − m)), where m
// = f_{k*} is the row maximum: every exponent is ≤ 0, so nothing overflows,
// and log1p keeps the loss accurate when one logit dominates and the loss
// is tiny. Logits of ±1e4 give a finite loss and gradient.
type CrossEntropy[T Float] struct{}

var (
	_ Func[float32] = CrossEntropy[float32]{}
	_ Func[float64] = CrossEntropy[float64]{}
)

// Name returns "cross-entropy".
func (CrossEntropy[T]) Name() string { return "cross-entropy" }

// Eval returns the mean over rows of ℓ and writes its gradient into grad.
func (e CrossEntropy[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	checkShape(e.Name(), out, target, grad, rows, cols)
	inv := 1 / float64(rows)
	var sum float64
	for row := range rows {
		o := out[row*cols : (row+1)*cols]
		y := target[row*cols : (row+1)*cols]
		top := argmax(o)
		m := float64(o[top])
		var s float64 // Σ_{k≠top} exp(f_k − m)
		for k, v := range o {
			if k != top {
				s += math.Exp(float64(v) - m)
			}
		}
		ls := math.Log1p(s) // log Σ_k exp(f_k − m)
		var l, sy float64
		for j, v := range y {
			yj := float64(v)
			// −log softmax(f)_j = lse − f_j = (m − f_j) + ls, every part ≥ 0.
			l += yj * ((m - float64(o[j])) + ls)
			sy += yj
		}
		sum += l
		if grad != nil {
			z := 1 + s
			g := grad[row*cols : (row+1)*cols]
			for j, v := range o {
				p := math.Exp(float64(v)-m) / z
				g[j] = T((p*sy - float64(y[j])) * inv)
			}
		}
	}
	return sum * inv
}
