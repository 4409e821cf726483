package loss

import "math"

// Logistic is the binary logistic loss ℓ(f, y) = log(1 + exp(−y·f)) on one
// output per row (cols must be 1) with targets y = ±1; y·f is the margin.
// The gradient is −y·σ(−y·f)/rows, with σ the logistic sigmoid.
//
// It is computed as max(−z, 0) + log1p(exp(−|z|)) with z = y·f, so the
// exponent is never positive: margins of ±1e4 give a finite loss (1e4 and
// 0) and gradient. With cols ≠ 1 Eval panics, since a multi-column output
// given to a binary loss is a wiring mistake.
//
// Two-class softmax cross-entropy on logits (a, b) with the class-0 target
// is this loss at f = a − b, y = +1.
type Logistic[T Float] struct{}

var (
	_ Func[float32] = Logistic[float32]{}
	_ Func[float64] = Logistic[float64]{}
)

// Name returns "logistic".
func (Logistic[T]) Name() string { return "logistic" }

// Eval returns the mean over rows of ℓ and writes its gradient into grad.
func (l Logistic[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	checkShape(l.Name(), out, target, grad, rows, cols)
	checkBinary(l.Name(), cols)
	inv := 1 / float64(rows)
	var sum float64
	for i, v := range out[:rows] {
		y := float64(target[i])
		z := y * float64(v)
		e := math.Exp(-math.Abs(z)) // in (0, 1]
		sum += max(-z, 0) + math.Log1p(e)
		if grad != nil {
			// σ(−z) = 1/(1 + e^z), written so no exponential overflows.
			var sig float64
			if z >= 0 {
				sig = e / (1 + e)
			} else {
				sig = 1 / (1 + e)
			}
			grad[i] = T(-y * sig * inv)
		}
	}
	return sum * inv
}

// Exponential is the exponential loss ℓ(f, y) = exp(−y·f) on one output per
// row (cols must be 1, or Eval panics) with targets y = ±1. The gradient is
// −y·exp(−y·f)/rows.
//
// The loss grows without bound on badly wrong outputs: a margin y·f below
// about −709 overflows float64 to +Inf, and with T = float32 the gradient
// element overflows to ±Inf once the margin is below about −88 − log(rows).
// That is the loss, not its evaluation; normalize the outputs if such
// margins can occur.
type Exponential[T Float] struct{}

var (
	_ Func[float32] = Exponential[float32]{}
	_ Func[float64] = Exponential[float64]{}
)

// Name returns "exponential".
func (Exponential[T]) Name() string { return "exponential" }

// Eval returns the mean over rows of ℓ and writes its gradient into grad.
func (x Exponential[T]) Eval(out, target []T, rows, cols int, grad []T) float64 {
	checkShape(x.Name(), out, target, grad, rows, cols)
	checkBinary(x.Name(), cols)
	inv := 1 / float64(rows)
	var sum float64
	for i, v := range out[:rows] {
		y := float64(target[i])
		e := math.Exp(-y * float64(v))
		sum += e
		if grad != nil {
			grad[i] = T(-y * e * inv)
		}
	}
	return sum * inv
}
