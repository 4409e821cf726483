package net

import (
	"fmt"
	"math"

	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/net/schema"
)

// BatchNorm normalizes each unit over the minibatch (batch normalization):
//
//	y = γ·(x − μ)/√(σ² + ε) + β
//
// per unit, where in training mode μ and σ² are the batch's mean and
// biased variance, (1/B)Σ(x − μ)² over its B rows, and in inference mode
// the running mean and variance. γ is a learned per-unit scale (1 without
// one), β a learned per-unit shift (0 without one, the default), and
// ε = 1e-5 unless set (common practice, no source).
//
// # Homogeneity
//
// Without a shift the node adds no bias, but subtracting the batch mean
// is itself a shift of the pre-activation, by an amount that depends on
// the other rows: a network with batch normalization is not positively
// homogeneous in its inputs, and in inference mode it subtracts a stored
// constant. What remains: in training mode the output is invariant (up to
// ε) to scaling the weights of the layer before it, BN(c·x) = BN(x) for
// c > 0, so the loss's gradient with respect to those weights is
// orthogonal to them and their norm only sets the effective step size;
// and the network's output is positively homogeneous of degree 1 in the
// scale and shift (γ, β) of the last such node and, separately, in the
// readout's weights.
//
// # Weight decay
//
// γ and β carry Decay = true. By the homogeneity above, scale could move
// from the (decayed) readout weights into an undecayed γ of the last node
// at no cost, and weight decay would no longer bound the output's scale;
// decaying γ and β too keeps λ‖θ‖² a penalty on the product.
//
// # Modes and running statistics
//
// A node starts in inference mode; Network.SetTraining switches every
// such node of a network. The trainer of package optim switches to
// training mode only around the forward pass of its steps, so validation,
// diagnostics and serving see the running statistics. Each training-mode
// Forward over at least two rows with finite statistics updates them,
// r ← 0.9·r + 0.1·b with momentum 0.1 (common practice, no source), with
// the batch's biased variance: inference then divides by the spread the
// network was trained to see, E[σ²_B] = (B−1)/B·σ², and a one-row batch,
// whose variance is 0 and says nothing of the spread, changes nothing.
// The running statistics start at mean 0 and variance 1, are held in the
// element type, and are saved in model files and checkpoints; serving uses
// exactly the stored values (internal/arith, one function for both).
//
// Backward differentiates the last Forward in the mode it ran in: in
// training mode through μ and σ² (the exact batch-normalization
// gradient), in inference mode with the running statistics fixed.
type BatchNorm[T Float] struct {
	name         string
	width        int
	scale, shift bool
	eps          float64
	// Scale (γ) and Shift (β) are the learned parameters, "<name>.scale"
	// and "<name>.shift", 1×width; nil when the node has none.
	Scale, Shift *Param[T]
	// Mean and Var are the running statistics, "<name>.mean" and
	// "<name>.var".
	Mean, Var *Running[T]

	training, hold bool
	// From the last Forward: its mode, the statistics it used (widened)
	// and the factors γ/√(σ² + ε).
	lastTraining         bool
	mu, sig2, factor, sh []float64
	sdy, sdyx            []float64 // Backward's sums per unit
}

// Running is a named array of a node's state that training updates
// without a gradient, such as batch normalization's running mean and
// variance. It is not a parameter: the update rule never touches it, but
// model files and checkpoints store it, and a run that keeps its best
// epoch keeps it with the weights.
type Running[T Float] struct {
	Name  string
	Value []T
}

// BatchNormSettings configures a batch-normalization node. The zero value
// learns neither a scale nor a shift and uses ε = 1e-5.
type BatchNormSettings struct {
	Scale   bool    // learn a per-unit scale γ
	Shift   bool    // learn a per-unit shift β (a bias: the network is then not bias-free)
	Epsilon float64 // added to the variance; zero means 1e-5
}

// NewBatchNorm returns a batch-normalization node; its width is set by
// the builder.
func NewBatchNorm[T Float](name string, s BatchNormSettings) *BatchNorm[T] {
	eps := s.Epsilon
	if eps == 0 {
		eps = arith.BatchNormEpsilon
	}
	return &BatchNorm[T]{name: name, scale: s.Scale, shift: s.Shift, eps: eps}
}

func (b *BatchNorm[T]) Name() string { return b.name }
func (b *BatchNorm[T]) Kind() string { return schema.KindBatchNorm }

// Settings returns the node's settings, Epsilon filled in.
func (b *BatchNorm[T]) Settings() BatchNormSettings {
	return BatchNormSettings{Scale: b.scale, Shift: b.shift, Epsilon: b.eps}
}

// Width is the number of units normalized.
func (b *BatchNorm[T]) Width() int { return b.width }

func (b *BatchNorm[T]) Connect(in int) (int, error) {
	if in < 1 {
		return 0, fmt.Errorf("input width %d: nothing to normalize", in)
	}
	if math.IsNaN(b.eps) || math.IsInf(b.eps, 0) || b.eps <= 0 {
		return 0, fmt.Errorf("epsilon %v: want a finite number > 0 (1e-5 is usual)", b.eps)
	}
	b.width = in
	if b.scale {
		b.Scale = newParam[T](b.name+".scale", 1, in, true)
		for i := range b.Scale.Value {
			b.Scale.Value[i] = 1
		}
	}
	if b.shift {
		b.Shift = newParam[T](b.name+".shift", 1, in, true)
	}
	b.Mean = &Running[T]{Name: b.name + ".mean", Value: make([]T, in)}
	b.Var = &Running[T]{Name: b.name + ".var", Value: make([]T, in)}
	for i := range b.Var.Value {
		b.Var.Value[i] = 1
	}
	b.mu, b.sig2 = make([]float64, in), make([]float64, in)
	b.factor, b.sh = make([]float64, in), make([]float64, in)
	b.sdy, b.sdyx = make([]float64, in), make([]float64, in)
	return in, nil
}

func (b *BatchNorm[T]) Params() []*Param[T] {
	var ps []*Param[T]
	if b.Scale != nil {
		ps = append(ps, b.Scale)
	}
	if b.Shift != nil {
		ps = append(ps, b.Shift)
	}
	return ps
}

// RunningStats returns the running mean and variance.
func (b *BatchNorm[T]) RunningStats() []*Running[T] { return []*Running[T]{b.Mean, b.Var} }

// SetTraining selects training mode (batch statistics, running ones
// updated) or inference mode (running statistics).
func (b *BatchNorm[T]) SetTraining(on bool) { b.training = on }

// HoldRunning, while set, keeps training-mode passes from updating the
// running statistics: for a measurement of the training objective (its
// curvature, say) that must not change the model.
func (b *BatchNorm[T]) HoldRunning(hold bool) { b.hold = hold }

// Training reports the node's mode.
func (b *BatchNorm[T]) Training() bool { return b.training }

func (b *BatchNorm[T]) gamma(j int) float64 {
	if b.Scale == nil {
		return 1
	}
	return float64(b.Scale.Value[j])
}

func (b *BatchNorm[T]) Forward(x, y []T, rows int) {
	w := b.width
	x, y = x[:rows*w], y[:rows*w]
	if b.training {
		clear(b.mu)
		clear(b.sig2)
		for r := range rows {
			for j, v := range x[r*w : (r+1)*w] {
				b.mu[j] += float64(v)
			}
		}
		n := float64(rows)
		for j := range b.mu {
			b.mu[j] /= n
		}
		for r := range rows {
			for j, v := range x[r*w : (r+1)*w] {
				d := float64(v) - b.mu[j]
				b.sig2[j] += float64(d * d)
			}
		}
		finite := true
		for j := range b.sig2 {
			b.sig2[j] /= n
			finite = finite && !math.IsNaN(b.sig2[j]) && !math.IsInf(b.sig2[j], 0) && !math.IsInf(b.mu[j], 0)
		}
		if rows >= 2 && finite && !b.hold {
			const m = arith.BatchNormMomentum
			for j := range b.mu {
				b.Mean.Value[j] = T(float64((1-m)*float64(b.Mean.Value[j])) + float64(m*b.mu[j]))
				b.Var.Value[j] = T(float64((1-m)*float64(b.Var.Value[j])) + float64(m*b.sig2[j]))
			}
		}
	} else {
		for j := range b.mu {
			b.mu[j], b.sig2[j] = float64(b.Mean.Value[j]), float64(b.Var.Value[j])
		}
	}
	for j := range b.factor {
		b.factor[j] = arith.BatchNormFactor(b.gamma(j), b.sig2[j], b.eps)
		b.sh[j] = 0
		if b.Shift != nil {
			b.sh[j] = float64(b.Shift.Value[j])
		}
	}
	for r := range rows {
		arith.BatchNormRow(x[r*w:(r+1)*w], y[r*w:(r+1)*w], b.mu, b.factor, b.sh)
	}
	b.lastTraining = b.training
}

// Backward: with x̂ = (x − μ)/√(σ² + ε) and y = γx̂ + β,
//
//	∂L/∂γ_j = Σ_r dy_rj·x̂_rj,   ∂L/∂β_j = Σ_r dy_rj,
//
// and in training mode, where μ and σ² depend on every row (from memory;
// checked against finite differences by internal/conform),
//
//	dx_rj = γ_j/√(σ²_j + ε) · (dy_rj − (1/B)Σ_r dy_rj − x̂_rj·(1/B)Σ_r dy_rj·x̂_rj),
//
// in inference mode dx_rj = dy_rj·γ_j/√(v_j + ε).
func (b *BatchNorm[T]) Backward(x, y, dy, dx []T, rows int) {
	w := b.width
	x, dy = x[:rows*w], dy[:rows*w]
	clear(b.sdy)
	clear(b.sdyx)
	for r := range rows {
		for j, g := range dy[r*w : (r+1)*w] {
			xh := (float64(x[r*w+j]) - b.mu[j]) / math.Sqrt(b.sig2[j]+b.eps)
			b.sdy[j] += float64(g)
			b.sdyx[j] += float64(float64(g) * xh)
		}
	}
	if b.Scale != nil {
		for j := range b.sdyx {
			b.Scale.Grad[j] = T(b.sdyx[j])
		}
	}
	if b.Shift != nil {
		for j := range b.sdy {
			b.Shift.Grad[j] = T(b.sdy[j])
		}
	}
	if dx == nil {
		return
	}
	dx = dx[:rows*w]
	if !b.lastTraining {
		for r := range rows {
			for j, g := range dy[r*w : (r+1)*w] {
				dx[r*w+j] = T(float64(g) * b.factor[j])
			}
		}
		return
	}
	n := float64(rows)
	for r := range rows {
		for j, g := range dy[r*w : (r+1)*w] {
			inv := 1 / math.Sqrt(b.sig2[j]+b.eps)
			xh := (float64(x[r*w+j]) - b.mu[j]) * inv
			dx[r*w+j] = T(b.gamma(j) * inv * (float64(g) - b.sdy[j]/n - float64(xh*b.sdyx[j])/n))
		}
	}
}

// SetTraining puts every node of the network that has a training and an
// inference mode (batch normalization) into training mode (on) or
// inference mode. A network starts in inference mode; the trainer of
// package optim switches to training mode only around the forward pass
// of each step. A program that runs its own training loop calls
// SetTraining(true) before its Forward and SetTraining(false) after.
func (n *Network[T]) SetTraining(on bool) {
	for _, nd := range n.nodes {
		if m, ok := nd.(interface{ SetTraining(bool) }); ok {
			m.SetTraining(on)
		}
	}
}

// HoldRunning, while set, keeps the training-mode passes of every
// batch-normalization node from updating its running statistics (see
// BatchNorm.HoldRunning).
func (n *Network[T]) HoldRunning(hold bool) {
	for _, nd := range n.nodes {
		if m, ok := nd.(interface{ HoldRunning(bool) }); ok {
			m.HoldRunning(hold)
		}
	}
}

// Running returns the running statistics of every node that keeps some
// (batch normalization: "<node>.mean", "<node>.var"), in node order. The
// slice is the network's own.
func (n *Network[T]) Running() []*Running[T] { return n.running }
