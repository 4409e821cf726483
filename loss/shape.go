package loss

import (
	"fmt"
	"math"
)

// checkShape panics unless rows and cols are positive and out, target and
// (when not nil) grad hold at least rows·cols values. name is the loss's
// Name, so the message says which loss was wired wrongly.
func checkShape[T Float](name string, out, target, grad []T, rows, cols int) {
	if rows < 1 || cols < 1 {
		panic(fmt.Sprintf("loss: %s: %d rows of width %d: need at least one row and one column", name, rows, cols))
	}
	n := rows * cols
	switch {
	case len(out) < n:
		short(name, "out", len(out), rows, cols)
	case len(target) < n:
		short(name, "target", len(target), rows, cols)
	case grad != nil && len(grad) < n:
		short(name, "grad", len(grad), rows, cols)
	}
}

func short(name, what string, have, rows, cols int) {
	panic(fmt.Sprintf("loss: %s: %s: %d values cannot hold %d rows of width %d", name, what, have, rows, cols))
}

// checkBinary panics unless cols is 1: the binary losses score one output
// per row against a target of ±1.
func checkBinary(name string, cols int) {
	if cols != 1 {
		panic(fmt.Sprintf("loss: %s: width %d, want 1: a binary loss takes one output per row with targets ±1 (use cross-entropy or a square loss for several classes)", name, cols))
	}
}

// checkLambda panics on a negative or NaN weight-decay coefficient, for
// which the objective of RhoStar has no minimizer or none worth reporting.
func checkLambda(name string, lambda float64) {
	if !(lambda >= 0) || math.IsInf(lambda, 1) {
		panic(fmt.Sprintf("loss: %s: RhoStar: weight decay λ = %v, want a finite λ ≥ 0", name, lambda))
	}
}

// argmax returns the index of the first largest element of y: the class of
// a one-hot target row.
func argmax[T Float](y []T) int {
	c := 0
	for j, v := range y {
		if v > y[c] {
			c = j
		}
	}
	return c
}
