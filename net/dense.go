package net

import (
	"fmt"
	"github.com/rhomb/rhomb/net/schema"

	"github.com/rhomb/rhomb/internal/kern"
)

// Dense is a bias-free fully connected layer, y = x·Wᵀ, with W of shape
// out×in. Having no bias keeps the network positively homogeneous in its
// weights; see Builder.ConstantFeature for the usual stand-in.
type Dense[T Float] struct {
	name    string
	in, out int
	readout bool
	W       *Param[T]
}

// NewDense returns a dense layer with out units; its input width is set by
// the builder.
func NewDense[T Float](name string, out int) *Dense[T] { return &Dense[T]{name: name, out: out} }

func (d *Dense[T]) Name() string { return d.name }

// Kind is "dense", or "readout" for the network's final linear layer.
func (d *Dense[T]) Kind() string {
	if d.readout {
		return schema.KindReadout
	}
	return schema.KindDense
}

// Readout reports whether the layer is the network's linear readout.
func (d *Dense[T]) Readout() bool { return d.readout }

// In and Out are the layer's input and output widths.
func (d *Dense[T]) In() int  { return d.in }
func (d *Dense[T]) Out() int { return d.out }

func (d *Dense[T]) Connect(in int) (int, error) {
	if d.out < 1 {
		return 0, fmt.Errorf("width %d: a dense layer needs at least one unit", d.out)
	}
	if in < 1 {
		return 0, fmt.Errorf("input width %d: a dense layer needs at least one input", in)
	}
	d.in = in
	d.W = newParam[T](d.name+".W", d.out, in, true)
	return d.out, nil
}

func (d *Dense[T]) Params() []*Param[T] { return []*Param[T]{d.W} }

func (d *Dense[T]) Forward(x, y []T, rows int) {
	kern.Gemm(false, true, rows, d.out, d.in, 1, x, d.in, d.W.Value, d.in, 0, y, d.out)
}

func (d *Dense[T]) Backward(x, y, dy, dx []T, rows int) {
	// dW = dyᵀ·x (out×in); dx = dy·W (rows×in).
	kern.Gemm(true, false, d.out, d.in, rows, 1, dy, d.out, x, d.in, 0, d.W.Grad, d.in)
	if dx != nil {
		kern.Gemm(false, false, rows, d.in, d.out, 1, dy, d.out, d.W.Value, d.in, 0, dx, d.in)
	}
}
