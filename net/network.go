package net

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Network is a built chain of nodes with the buffers to run it.
//
// Forward keeps every node's output until the next Forward, so Backward can
// use them; a Network is therefore not safe for concurrent use. Buffers are
// sized for the largest batch seen and reused: after the first pass at a
// given batch size, Forward and Backward allocate nothing.
type Network[T Float] struct {
	nodes   []Node[T]
	widths  []int // widths[i] is node i's input width; widths[len(nodes)] the output width
	byName  map[string]Node[T]
	params  []*Param[T]
	dense   []*Dense[T]
	running []*Running[T] // batch normalization's running statistics, in node order

	capRows int
	rows    int
	x       []T   // the input of the last Forward (the caller's buffer)
	acts    [][]T // acts[i]: output of node i
	grads   [][]T // grads[i]: gradient of the loss w.r.t. acts[i]
}

// In is the width of an input row; Out the width of an output row.
func (n *Network[T]) In() int  { return n.widths[0] }
func (n *Network[T]) Out() int { return n.widths[len(n.widths)-1] }

// Nodes returns the nodes in order. The slice is the network's own.
func (n *Network[T]) Nodes() []Node[T] { return n.nodes }

// Node returns the node with the given name, or nil.
func (n *Network[T]) Node(name string) Node[T] { return n.byName[name] }

// Params returns every trainable tensor in node order. The slice is the
// network's own.
func (n *Network[T]) Params() []*Param[T] { return n.params }

// Dense returns the dense layers (the readout last) in order.
func (n *Network[T]) Dense() []*Dense[T] { return n.dense }

// Base returns n itself. It lets a plain network stand wherever a wrapped
// one (see package normalize) is expected.
func (n *Network[T]) Base() *Network[T] { return n }

func (n *Network[T]) ensure(rows int) {
	if rows <= n.capRows {
		return
	}
	n.acts = make([][]T, len(n.nodes))
	n.grads = make([][]T, len(n.nodes))
	for i := range n.nodes {
		n.acts[i] = make([]T, rows*n.widths[i+1])
		n.grads[i] = make([]T, rows*n.widths[i+1])
	}
	n.capRows = rows
}

// Forward runs the network on rows input rows stored in x (rows×In) and
// returns the outputs (rows×Out). The returned slice belongs to the network
// and is overwritten by the next Forward. x must stay unchanged until
// Backward.
func (n *Network[T]) Forward(x []T, rows int) []T {
	if len(x) < rows*n.In() {
		panic(fmt.Sprintf("net: Forward: %d values cannot hold %d rows of width %d", len(x), rows, n.In()))
	}
	n.ensure(rows)
	n.rows, n.x = rows, x
	in := x
	for i, nd := range n.nodes {
		out := n.acts[i][:rows*n.widths[i+1]]
		nd.Forward(in, out, rows)
		in = out
	}
	return in
}

// Backward takes the gradient of the loss with respect to the outputs of
// the last Forward (rows×Out) and writes every parameter's gradient.
func (n *Network[T]) Backward(dOut []T) {
	rows := n.rows
	if n.x == nil {
		panic("net: Backward called before Forward")
	}
	if len(dOut) < rows*n.Out() {
		panic(fmt.Sprintf("net: Backward: %d values cannot hold %d rows of width %d", len(dOut), rows, n.Out()))
	}
	last := len(n.nodes) - 1
	dy := dOut[:rows*n.Out()]
	for i := last; i >= 0; i-- {
		x := n.x
		if i > 0 {
			x = n.acts[i-1][:rows*n.widths[i]]
		}
		var dx []T
		if i > 0 {
			dx = n.grads[i-1][:rows*n.widths[i]]
		}
		n.nodes[i].Backward(x, n.acts[i][:rows*n.widths[i+1]], dy, dx, rows)
		dy = dx
	}
}

// Output returns the output of the named node from the last Forward
// (rows×width), or nil if there is no such node. It is how diagnostics read
// the last hidden layer's features.
func (n *Network[T]) Output(name string) (out []T, width int) {
	for i, nd := range n.nodes {
		if nd.Name() == name && n.acts != nil {
			return n.acts[i][:n.rows*n.widths[i+1]], n.widths[i+1]
		}
	}
	return nil, 0
}

// Scheme names a random initialization of the dense layers.
type Scheme int

const (
	// HeNormal draws W_ij ~ N(0, 2/in), which keeps the activations' scale
	// through ReLU layers (He et al. 2015).
	HeNormal Scheme = iota
	// LeCunNormal draws W_ij ~ N(0, 1/in) (LeCun et al. 1998).
	LeCunNormal
)

func (s Scheme) String() string {
	switch s {
	case HeNormal:
		return "he-normal"
	case LeCunNormal:
		return "lecun-normal"
	}
	return fmt.Sprintf("Scheme(%d)", int(s))
}

// InitSettings chooses how Init draws the weights.
type InitSettings struct {
	Scheme Scheme // the zero value is HeNormal
	// Rho0, when positive, rescales the drawn weights so that the product
	// of the dense layers' Frobenius norms is Rho0, shared equally: every
	// layer gets ‖W_k‖_F = Rho0^(1/L). Zero keeps the scheme's own scale.
	Rho0 float64
	// Seed selects the random stream; the same seed gives the same bits.
	Seed uint64
}

// Init draws every dense layer's weights. It returns an error for a
// negative or non-finite Rho0.
func (n *Network[T]) Init(s InitSettings) error {
	if s.Rho0 < 0 || math.IsNaN(s.Rho0) || math.IsInf(s.Rho0, 0) {
		return fmt.Errorf("net: Init: Rho0 = %v; want a positive scale, or 0 for the scheme's own", s.Rho0)
	}
	rng := rand.New(rand.NewPCG(s.Seed, 0x72686f6d62)) // second word: "rhomb"
	per := math.Pow(s.Rho0, 1/float64(len(n.dense)))
	for _, d := range n.dense {
		v := 2.0
		if s.Scheme == LeCunNormal {
			v = 1
		}
		sd := math.Sqrt(v / float64(d.in))
		w := d.W.Value
		sum := 0.0
		draws := make([]float64, len(w))
		for i := range draws {
			draws[i] = sd * rng.NormFloat64()
			sum += draws[i] * draws[i]
		}
		scale := 1.0
		if s.Rho0 > 0 {
			scale = per / math.Sqrt(sum)
		}
		for i, x := range draws {
			w[i] = T(x * scale)
		}
	}
	return nil
}

// Rho returns the product of the dense layers' Frobenius norms, ρ = ∏‖W_k‖_F:
// by positive homogeneity f(x; W) = ρ·f(x; V) with V_k = W_k/‖W_k‖_F.
func (n *Network[T]) Rho() float64 {
	r := 1.0
	for _, d := range n.dense {
		r *= FrobeniusNorm(d.W.Value)
	}
	return r
}

// FrobeniusNorm returns √Σv², accumulated in float64 and scaled against
// overflow.
func FrobeniusNorm[T Float](v []T) float64 {
	scale, ssq := 0.0, 1.0
	for _, x := range v {
		if x == 0 {
			continue
		}
		a := math.Abs(float64(x))
		if scale < a {
			ssq = 1 + ssq*(scale/a)*(scale/a)
			scale = a
		} else {
			ssq += (a / scale) * (a / scale)
		}
	}
	return scale * math.Sqrt(ssq)
}
