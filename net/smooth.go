package net

import (
	"fmt"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/net/schema"
	"math"
)

// SmoothReLU is the softplus-smoothed rectifier with sharpness β > 0,
// applied elementwise:
//
//	y = log(1 + exp(βx))/β,   dy/dx = σ(βx) = 1/(1 + exp(−βx)).
//
// It exists for research on how the kink of ReLU matters: it is smooth
// everywhere, and it tends to ReLU uniformly as β → ∞, with
//
//	max_x |SmoothReLU(x) − ReLU(x)| = log(2)/β,
//
// attained at x = 0. (For x ≥ 0, log(1 + e^{βx})/β − x = log(1 + e^{−βx})/β;
// for x < 0 the difference is log(1 + e^{βx})/β; both are log(1 + e^{−β|x|})/β,
// which decreases in |x| from log(2)/β at 0 towards 0.)
//
// Unlike ReLU it is not positively homogeneous, so a network that uses it
// does not factor as ρ·f(x; V). What holds instead is a change of
// sharpness: SmoothReLU_β(cx) = c·SmoothReLU_{cβ}(x) for c > 0; scaling the
// weights by c acts like sharpening the kink by c.
//
// Values are computed in float64 whatever T is, and rounded to T once.
type SmoothReLU[T Float] struct {
	name  string
	beta  float64
	width int
}

// NewSmoothReLU returns a smoothed rectifier with the given sharpness β.
// The sharpness is checked by Connect, so that a bad value is reported by
// Builder.Build with the node's name.
func NewSmoothReLU[T Float](name string, sharpness float64) *SmoothReLU[T] {
	return &SmoothReLU[T]{name: name, beta: sharpness}
}

func (s *SmoothReLU[T]) Name() string        { return s.name }
func (s *SmoothReLU[T]) Kind() string        { return schema.KindSmoothReLU }
func (s *SmoothReLU[T]) Params() []*Param[T] { return nil }

// Sharpness returns β, the factor in log(1 + exp(βx))/β.
func (s *SmoothReLU[T]) Sharpness() float64 { return s.beta }

// Connect checks the sharpness and the input width.
func (s *SmoothReLU[T]) Connect(in int) (int, error) {
	if err := arith.CheckSharpness[T](s.beta); err != nil {
		return 0, err
	}
	if in < 1 {
		return 0, fmt.Errorf("input width %d: nothing to rectify", in)
	}
	s.width = in
	return in, nil
}

// sigmoid returns 1/(1 + e^{−z}), calling exp only on −|z| so that it
// cannot overflow.
func sigmoid(z float64) float64 {
	e := math.Exp(-math.Abs(z))
	if z >= 0 {
		return 1 / (1 + e)
	}
	return e / (1 + e)
}

func (s *SmoothReLU[T]) Forward(x, y []T, rows int) {
	x, y = x[:rows*s.width], y[:rows*s.width]
	// arith.SmoothReLU is the one copy of this arithmetic, shared with
	// serving (package net/classify).
	for i, v := range x {
		y[i] = T(arith.SmoothReLU(float64(v), s.beta))
	}
}

func (s *SmoothReLU[T]) Backward(x, y, dy, dx []T, rows int) {
	if dx == nil {
		return
	}
	x, dy, dx = x[:rows*s.width], dy[:rows*s.width], dx[:rows*s.width]
	b := s.beta
	for i, v := range x {
		dx[i] = T(float64(dy[i]) * sigmoid(b*float64(v)))
	}
}
