package net

import "github.com/rhomb/rhomb/net/schema"

import "fmt"

// ConstantOne appends a feature that is always 1 to every input row. A
// bias-free first layer then learns a bias as the weights of that feature,
// while the network stays positively homogeneous in its weights:
// f(x; ρ_1V_1, …, ρ_LV_L) = (∏ρ_k)·f(x; V) still holds, and with it the
// scale/direction analysis (margins, ρ*). What is lost is homogeneity in
// the input: f(cx) ≠ c·f(x), because the appended 1 does not scale.
type ConstantOne[T Float] struct {
	name string
	in   int
}

func (c *ConstantOne[T]) Name() string        { return c.name }
func (c *ConstantOne[T]) Kind() string        { return schema.KindConstantOne }
func (c *ConstantOne[T]) Params() []*Param[T] { return nil }

func (c *ConstantOne[T]) Connect(in int) (int, error) {
	if in < 1 {
		return 0, fmt.Errorf("input width %d: no features to extend", in)
	}
	c.in = in
	return in + 1, nil
}

func (c *ConstantOne[T]) Forward(x, y []T, rows int) {
	for r := range rows {
		copy(y[r*(c.in+1):], x[r*c.in:(r+1)*c.in])
		y[r*(c.in+1)+c.in] = 1
	}
}

func (c *ConstantOne[T]) Backward(x, y, dy, dx []T, rows int) {
	if dx == nil {
		return
	}
	for r := range rows {
		copy(dx[r*c.in:(r+1)*c.in], dy[r*(c.in+1):])
	}
}
