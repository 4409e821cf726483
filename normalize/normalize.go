package normalize

import (
	"errors"
	"fmt"
	"math"

	"github.com/rhomb/rhomb/net"
)

// Scale chooses how many scales a wrapped network has.
type Scale int

const (
	// PerLayer gives every normalized layer its own scale: W_k = ρ_k·V_k,
	// and the network's scale is ρ = ∏ρ_k.
	PerLayer Scale = iota
	// Global gives the network one scale ρ: every normalized layer holds a
	// unit direction and ρ multiplies the first of them, so that
	// f(x; W) = ρ·f(x; V) by positive homogeneity.
	Global
)

// Hold chooses how the directions are kept on the unit sphere.
type Hold int

const (
	// Multiplier keeps ‖V_k‖ = 1 with a Lagrange multiplier: the gradient
	// of V_k is projected onto the tangent space of the sphere at V_k,
	// g ← g − ⟨g, V_k⟩V_k/‖V_k‖², which is the gradient of the objective
	// plus ν_k(‖V_k‖² − 1) with ν_k chosen so that d‖V_k‖²/dt = 0. A finite
	// step still leaves the sphere at second order in the learning rate;
	// Options.NoRetraction leaves that drift in place.
	Multiplier Hold = iota
	// Projection takes the plain gradient step on V_k and then rescales V_k
	// back to unit norm.
	Projection
)

// Options configures Wrap. The zero value normalizes every dense layer,
// readout included, with a scale per layer, held by the multiplier with
// retraction.
type Options struct {
	Scale Scale
	Hold  Hold
	// PerUnit normalizes each row of W_k (the weights into one unit)
	// instead of the whole matrix: w_ki = ρ_ki·v_ki with ‖v_ki‖ = 1. The
	// scale of a layer is then a vector. PerUnit and Global exclude each
	// other.
	PerUnit bool
	// SkipReadout leaves the readout layer's W as an ordinary weight
	// (with weight decay on all of it), as is common practice.
	SkipReadout bool
	// NoRetraction, with Multiplier, leaves the directions where the step
	// put them instead of rescaling them to unit norm after every step.
	// The norms then drift by O(η²) per step; see DirectionNorms.
	NoRetraction bool
	// Layers, when non-empty, names the dense layers to normalize; the
	// others are left plain. SkipReadout still applies.
	Layers []string
}

// Net is a network whose chosen dense layers are split into scale and
// direction. It runs the same computation as the network it wraps (Forward,
// Backward, Params) but its trainable parameters are the scales and
// directions, not W: after every update, Forward writes W_k = ρ_k·V_k into
// the wrapped network before it runs.
type Net[T net.Float] struct {
	base   *net.Network[T]
	opts   Options
	layers []layer[T] // one per dense layer of base, in order
	rho    *net.Param[T]
	params []*net.Param[T]
	first  int // index of the layer that carries the global scale
}

type layer[T net.Float] struct {
	d   *net.Dense[T]
	v   *net.Param[T] // nil when the layer is left plain
	rho *net.Param[T] // 1×1 per layer, rows×1 per unit, nil for Global
}

// ErrZeroWeights is returned by Wrap for a layer (or, per unit, a row) whose
// weights are all zero: it has no direction. Initialize the network first.
var ErrZeroWeights = errors.New("normalize: weights are zero and have no direction; initialize the network before wrapping it")

// Wrap splits the chosen layers of n, which must be initialized. The
// function computed is unchanged: V_k = W_k/‖W_k‖_F and ρ_k = ‖W_k‖_F.
func Wrap[T net.Float](n *net.Network[T], o Options) (*Net[T], error) {
	if o.PerUnit && o.Scale == Global {
		return nil, errors.New("normalize: PerUnit and Global exclude each other: choose one scale per unit or one for the network")
	}
	for _, name := range o.Layers {
		if d, ok := n.Node(name).(*net.Dense[T]); !ok || d == nil {
			return nil, fmt.Errorf("normalize: Options.Layers names %q, which is not a dense layer of the network", name)
		}
	}
	w := &Net[T]{base: n, opts: o, first: -1}
	for _, d := range n.Dense() {
		on := (len(o.Layers) == 0 || contains(o.Layers, d.Name())) && !(o.SkipReadout && d.Readout())
		l := layer[T]{d: d}
		if !on {
			w.layers = append(w.layers, l)
			continue
		}
		l.v = &net.Param[T]{Name: d.Name() + ".V", Rows: d.Out(), Cols: d.In(), Value: make([]T, d.Out()*d.In()), Grad: make([]T, d.Out()*d.In())}
		copy(l.v.Value, d.W.Value)
		switch {
		case o.PerUnit:
			l.rho = &net.Param[T]{Name: d.Name() + ".rho", Rows: d.Out(), Cols: 1, Value: make([]T, d.Out()), Grad: make([]T, d.Out()), Decay: true}
			for i := range d.Out() {
				row := l.v.Value[i*d.In() : (i+1)*d.In()]
				r := net.FrobeniusNorm(row)
				if r == 0 {
					return nil, fmt.Errorf("%w (layer %q, row %d)", ErrZeroWeights, d.Name(), i)
				}
				scaleBy(row, 1/r)
				l.rho.Value[i] = T(r)
			}
		default:
			r := net.FrobeniusNorm(l.v.Value)
			if r == 0 {
				return nil, fmt.Errorf("%w (layer %q)", ErrZeroWeights, d.Name())
			}
			scaleBy(l.v.Value, 1/r)
			if o.Scale == PerLayer {
				l.rho = &net.Param[T]{Name: d.Name() + ".rho", Rows: 1, Cols: 1, Value: []T{T(r)}, Grad: make([]T, 1), Decay: true}
			}
		}
		w.layers = append(w.layers, l)
	}
	if o.Scale == Global {
		rho := 1.0
		for i, l := range w.layers {
			if l.v == nil {
				continue
			}
			if w.first < 0 {
				w.first = i
			}
			rho *= net.FrobeniusNorm(l.d.W.Value)
		}
		if w.first < 0 {
			return nil, errors.New("normalize: no layer left to normalize")
		}
		w.rho = &net.Param[T]{Name: "rho", Rows: 1, Cols: 1, Value: []T{T(rho)}, Grad: make([]T, 1), Decay: true}
	}
	for i, l := range w.layers {
		switch {
		case l.v == nil:
			w.params = append(w.params, l.d.W)
		case o.Scale == Global:
			if i == w.first {
				w.params = append(w.params, w.rho)
			}
			w.params = append(w.params, l.v)
		default:
			w.params = append(w.params, l.rho, l.v)
		}
	}
	w.sync()
	return w, nil
}

func contains(s []string, x string) bool {
	for _, v := range s {
		if v == x {
			return true
		}
	}
	return false
}

// Base returns the wrapped network, whose W the wrapper keeps equal to ρ·V.
func (w *Net[T]) Base() *net.Network[T] { return w.base }

// Params returns the trainable tensors: for each dense layer in order, its
// scale and direction ("<layer>.rho", "<layer>.V"), or its W when left
// plain; with Global the single "rho" comes before the first direction.
// Directions carry Decay = false: weight decay acts on the scales, as λρ².
func (w *Net[T]) Params() []*net.Param[T] { return w.params }

// Rho returns the network's scale ρ = ∏‖W_k‖_F over all dense layers.
func (w *Net[T]) Rho() float64 { return w.base.Rho() }

// Forward runs the wrapped network, whose W = ρ·V are current: Wrap,
// Constrain (which the trainer calls after every update) and Sync write
// them. After writing ρ or V yourself, call Sync before Forward.
func (w *Net[T]) Forward(x []T, rows int) []T {
	return w.base.Forward(x, rows)
}

// Backward runs the wrapped network's backward pass and turns each
// normalized layer's gradient G = ∂L/∂W into the gradients of its scale,
// ⟨G, V⟩, and of its direction, ρ·G (projected onto the sphere's tangent
// space under Multiplier).
func (w *Net[T]) Backward(dOut []T) {
	w.base.Backward(dOut)
	for i, l := range w.layers {
		if l.v == nil {
			continue
		}
		g, v, gv := l.d.W.Grad, l.v.Value, l.v.Grad
		in := l.d.In()
		switch {
		case w.opts.PerUnit:
			for r := range l.d.Out() {
				rs := r * in
				l.rho.Grad[r] = T(dot(g[rs:rs+in], v[rs:rs+in]))
				w.direction(g[rs:rs+in], v[rs:rs+in], gv[rs:rs+in], float64(l.rho.Value[r]))
			}
		case w.opts.Scale == Global:
			s := 1.0
			if i == w.first {
				w.rho.Grad[0] = T(dot(g, v))
				s = float64(w.rho.Value[0])
			}
			w.direction(g, v, gv, s)
		default:
			l.rho.Grad[0] = T(dot(g, v))
			w.direction(g, v, gv, float64(l.rho.Value[0]))
		}
	}
}

// direction writes gv = s·g, projected onto the tangent space at v under
// Multiplier.
func (w *Net[T]) direction(g, v, gv []T, s float64) {
	if w.opts.Hold != Multiplier {
		for i := range g {
			gv[i] = T(s * float64(g[i]))
		}
		return
	}
	c := dot(g, v) / dot(v, v)
	for i := range g {
		gv[i] = T(s * (float64(g[i]) - c*float64(v[i])))
	}
}

// Constrain returns the directions to the unit sphere after an update
// (always under Projection, unless NoRetraction under Multiplier). The
// trainer in package optim calls it after every step.
//
// Either way it then writes W = ρ·V, so the wrapped network's weights are
// current after every update.
func (w *Net[T]) Constrain() {
	defer w.sync()
	if w.opts.Hold == Multiplier && w.opts.NoRetraction {
		return
	}
	for _, l := range w.layers {
		if l.v == nil {
			continue
		}
		if w.opts.PerUnit {
			in := l.d.In()
			for r := range l.d.Out() {
				row := l.v.Value[r*in : (r+1)*in]
				if n := net.FrobeniusNorm(row); n > 0 {
					scaleBy(row, 1/n)
				}
			}
			continue
		}
		if n := net.FrobeniusNorm(l.v.Value); n > 0 {
			scaleBy(l.v.Value, 1/n)
		}
	}
}

// LayerScales writes into dst, for each dense layer of the base network
// in order, how the layer's norm ‖W_k‖_F moves under the gradient flow of
// the trained parameters, as a code: −1 fixed (under a global scale, a
// normalized layer other than the one that carries ρ: its direction is
// held at unit norm); 0 free without decay; 1 free with weight decay λ on
// its scale (a normalized layer's ρ_k, per layer or per unit, the global
// ρ, or a plain layer's W with Decay). Under the flow every free layer's
// norm obeys dρ_k/dt = −⟨G_k, W_k⟩/ρ_k − 2λ_kρ_k (for per-unit scales too,
// since ρ_k² = Σ_i ρ_{k,i}²), which package optim turns into ρ̇ and ρ* of
// the network. It returns dst, grown if needed.
func (w *Net[T]) LayerScales(dst []int8) []int8 {
	dst = dst[:0]
	for i, l := range w.layers {
		switch {
		case l.v == nil:
			dst = append(dst, boolCode(l.d.W.Decay))
		case w.opts.Scale == Global && i != w.first:
			dst = append(dst, -1)
		case w.opts.Scale == Global:
			dst = append(dst, boolCode(w.rho.Decay))
		default:
			dst = append(dst, boolCode(l.rho.Decay))
		}
	}
	return dst
}

func boolCode(b bool) int8 {
	if b {
		return 1
	}
	return 0
}

// DirectionNorms writes into dst, for each dense layer of the base network
// in order, the norm of its direction: ‖V_k‖_F for a normalized layer (the
// root mean square of the row norms per unit), 1 for a plain one (whose
// direction W_k/‖W_k‖_F is unit by construction). It returns dst, grown if
// needed.
func (w *Net[T]) DirectionNorms(dst []float64) []float64 {
	dst = dst[:0]
	for _, l := range w.layers {
		switch {
		case l.v == nil:
			dst = append(dst, 1)
		case w.opts.PerUnit:
			dst = append(dst, net.FrobeniusNorm(l.v.Value)/math.Sqrt(float64(l.d.Out())))
		default:
			dst = append(dst, net.FrobeniusNorm(l.v.Value))
		}
	}
	return dst
}

// Sync writes W = ρ·V into the wrapped network now. Wrap and Constrain
// (after every update) do this by themselves; call Sync after writing
// the parameters' values yourself (optim.SetParams does).
func (w *Net[T]) Sync() { w.sync() }

// Options returns the options the wrapper was made with.
func (w *Net[T]) Options() Options { return w.opts }

// sync writes W = ρ·V into every normalized layer of the base network.
func (w *Net[T]) sync() {
	for i, l := range w.layers {
		if l.v == nil {
			continue
		}
		wv, v := l.d.W.Value, l.v.Value
		switch {
		case w.opts.PerUnit:
			in := l.d.In()
			for r := range l.d.Out() {
				s := l.rho.Value[r]
				for j := r * in; j < (r+1)*in; j++ {
					wv[j] = s * v[j]
				}
			}
		case w.opts.Scale == Global:
			s := T(1)
			if i == w.first {
				s = w.rho.Value[0]
			}
			for j := range v {
				wv[j] = s * v[j]
			}
		default:
			s := l.rho.Value[0]
			for j := range v {
				wv[j] = s * v[j]
			}
		}
	}
}

func dot[T net.Float](a, b []T) float64 {
	s := 0.0
	for i := range a {
		s += float64(a[i]) * float64(b[i])
	}
	return s
}

func scaleBy[T net.Float](v []T, s float64) {
	for i := range v {
		v[i] = T(float64(v[i]) * s)
	}
}
