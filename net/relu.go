package net

import (
	"fmt"
	"github.com/rhomb/rhomb/net/schema"

	"github.com/rhomb/rhomb/internal/kern"
)

// ReLU is the rectifier y = max(0, x), applied elementwise. It is
// positively homogeneous: ReLU(cx) = c·ReLU(x) for c > 0, which is what
// makes a bias-free ReLU network factor as ρ·f(x; V).
type ReLU[T Float] struct {
	name  string
	width int
}

// NewReLU returns a rectifier node.
func NewReLU[T Float](name string) *ReLU[T] { return &ReLU[T]{name: name} }

func (r *ReLU[T]) Name() string        { return r.name }
func (r *ReLU[T]) Kind() string        { return schema.KindReLU }
func (r *ReLU[T]) Params() []*Param[T] { return nil }

func (r *ReLU[T]) Connect(in int) (int, error) {
	if in < 1 {
		return 0, fmt.Errorf("input width %d: nothing to rectify", in)
	}
	r.width = in
	return in, nil
}

// Forward computes y = max(x, 0) with Go's max (NaN stays NaN, −0
// becomes +0), in vector registers where the processor has them
// (kern.ReLU).
func (r *ReLU[T]) Forward(x, y []T, rows int) {
	kern.ReLU(x[:rows*r.width], y[:rows*r.width])
}

// Backward passes dy where the input was positive. The derivative at 0 is
// taken as 0 (common practice, no source; any value in [0, 1] is a valid
// subgradient).
func (r *ReLU[T]) Backward(x, y, dy, dx []T, rows int) {
	if dx == nil {
		return
	}
	n := rows * r.width
	kern.ReLUMask(x[:n], dy[:n], dx[:n])
}
