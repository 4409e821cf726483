package net

import (
	"fmt"
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
func (s *SmoothReLU[T]) Kind() string        { return "smooth-relu" }
func (s *SmoothReLU[T]) Params() []*Param[T] { return nil }

// Sharpness returns β, the factor in log(1 + exp(βx))/β.
func (s *SmoothReLU[T]) Sharpness() float64 { return s.beta }

// Connect checks the sharpness and the input width.
func (s *SmoothReLU[T]) Connect(in int) (int, error) {
	if math.IsNaN(s.beta) || math.IsInf(s.beta, 0) || s.beta <= 0 {
		return 0, fmt.Errorf("smooth ReLU sharpness β = %v: want a finite β > 0 (larger is closer to ReLU; the largest gap is log(2)/β, at 0)", s.beta)
	}
	if math.IsInf(float64(T(math.Ln2/s.beta)), 0) {
		return 0, fmt.Errorf("smooth ReLU sharpness β = %v: too small, the value at 0, log(2)/β, overflows; use a β of order 1 or larger", s.beta)
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
	// log(1 + e^{βx})/β = max(x, 0) + log1p(e^{−β|x|})/β: exp only sees
	// non-positive arguments, so nothing overflows even when βx does, and
	// the ReLU part is exact.
	b := s.beta
	for i, v := range x {
		u := float64(v)
		y[i] = T(max(u, 0) + math.Log1p(math.Exp(-b*math.Abs(u)))/b)
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
