package net

import (
	"errors"
	"fmt"
)

// Builder assembles a Network node by node. Each call names a node; the
// names must be unique. Nothing is checked until Build, which connects the
// nodes in order, infers every width and reports the first wiring mistake
// as a *BuildError naming the node.
//
// The graph is a chain: each node reads the output of the node before it.
type Builder[T Float] struct {
	in    int
	nodes []Node[T]
}

// NewBuilder starts a network whose input rows have the given width.
func NewBuilder[T Float](inputs int) *Builder[T] { return &Builder[T]{in: inputs} }

// Node appends any node, including one of the caller's own.
func (b *Builder[T]) Node(n Node[T]) *Builder[T] {
	b.nodes = append(b.nodes, n)
	return b
}

// ConstantFeature appends a feature that is always 1 to the input rows; see
// ConstantOne for why rhomb offers this instead of biases. It must come
// first.
func (b *Builder[T]) ConstantFeature(name string) *Builder[T] {
	return b.Node(&ConstantOne[T]{name: name})
}

// Dense appends a bias-free fully connected layer with the given number of
// units.
func (b *Builder[T]) Dense(name string, units int) *Builder[T] {
	return b.Node(NewDense[T](name, units))
}

// BatchNorm appends batch normalization (see BatchNorm) with ε = 1e-5:
// with a learned per-unit scale γ when scale is set, and a learned
// per-unit shift β when shift is set. Without a shift the network stays
// bias-free. Put it between a hidden dense layer and its activation.
func (b *Builder[T]) BatchNorm(name string, scale, shift bool) *Builder[T] {
	return b.Node(NewBatchNorm[T](name, BatchNormSettings{Scale: scale, Shift: shift}))
}

// ReLU appends a rectifier.
func (b *Builder[T]) ReLU(name string) *Builder[T] { return b.Node(NewReLU[T](name)) }

// Readout appends the final linear layer: outputs units (1 for binary
// classification with ±1 targets, one per class otherwise). It must be the
// last node.
func (b *Builder[T]) Readout(name string, units int) *Builder[T] {
	d := NewDense[T](name, units)
	d.readout = true
	return b.Node(d)
}

// BuildError reports a wiring mistake found by Build.
type BuildError struct {
	Node  string // the node's name; empty when the mistake is the network's
	Index int    // the node's position in the chain, from 0; -1 when none
	Err   error
}

func (e *BuildError) Error() string {
	if e.Index < 0 {
		return "net: " + e.Err.Error()
	}
	return fmt.Sprintf("net: node %d %q: %v", e.Index, e.Node, e.Err)
}

func (e *BuildError) Unwrap() error { return e.Err }

// Sentinel causes carried by BuildError.
var (
	ErrDuplicateName = errors.New("name already used by an earlier node")
	ErrNoReadout     = errors.New("the last node must be a readout layer")
	ErrMisplaced     = errors.New("node is not allowed at this position")
)

// Build connects the nodes and returns the network. Its weights are zero;
// call Init before training.
func (b *Builder[T]) Build() (*Network[T], error) {
	if b.in < 1 {
		return nil, &BuildError{Index: -1, Err: fmt.Errorf("input width %d: need at least one feature", b.in)}
	}
	if len(b.nodes) == 0 {
		return nil, &BuildError{Index: -1, Err: errors.New("no nodes: add at least a readout layer")}
	}
	seen := make(map[string]bool, len(b.nodes))
	widths := []int{b.in}
	for i, n := range b.nodes {
		fail := func(err error) (*Network[T], error) {
			return nil, &BuildError{Node: n.Name(), Index: i, Err: err}
		}
		if n.Name() == "" {
			return fail(errors.New("node has no name"))
		}
		if seen[n.Name()] {
			return fail(ErrDuplicateName)
		}
		seen[n.Name()] = true
		if _, ok := n.(*ConstantOne[T]); ok && i != 0 {
			return fail(fmt.Errorf("%w: the constant feature must be the first node", ErrMisplaced))
		}
		if d, ok := n.(*Dense[T]); ok && d.readout && i != len(b.nodes)-1 {
			return fail(fmt.Errorf("%w: the readout must be the last node", ErrMisplaced))
		}
		out, err := n.Connect(widths[i])
		if err != nil {
			return fail(err)
		}
		widths = append(widths, out)
	}
	last := b.nodes[len(b.nodes)-1]
	if d, ok := last.(*Dense[T]); !ok || !d.readout {
		return nil, &BuildError{Node: last.Name(), Index: len(b.nodes) - 1, Err: ErrNoReadout}
	}
	n := &Network[T]{nodes: b.nodes, widths: widths, byName: make(map[string]Node[T], len(b.nodes))}
	for _, nd := range b.nodes {
		n.byName[nd.Name()] = nd
		n.params = append(n.params, nd.Params()...)
		if d, ok := nd.(*Dense[T]); ok {
			n.dense = append(n.dense, d)
		}
		if r, ok := nd.(interface{ RunningStats() []*Running[T] }); ok {
			n.running = append(n.running, r.RunningStats()...)
		}
	}
	b.nodes = nil // the nodes now belong to the network
	return n, nil
}

// SmoothReLU appends a softplus-smoothed rectifier of sharpness β; see
// SmoothReLU.
func (b *Builder[T]) SmoothReLU(name string, sharpness float64) *Builder[T] {
	return b.Node(NewSmoothReLU[T](name, sharpness))
}

// PolyReLU appends a polynomial stand-in for ReLU of the given degree on
// [lo, hi]; see PolyReLU.
func (b *Builder[T]) PolyReLU(name string, degree int, lo, hi float64, fit Fit) *Builder[T] {
	return b.Node(NewPolyReLU[T](name, degree, lo, hi, fit))
}
