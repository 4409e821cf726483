package net

import "github.com/rhomb/rhomb/internal/kern"

// Float is the set of element types rhomb computes in: float32 or float64.
type Float = kern.Float

// Param is one named, trainable tensor of a network, stored row-major.
// Value and Grad have Rows·Cols elements. Grad holds the gradient of the
// last Backward pass; Backward overwrites it, it never accumulates.
type Param[T Float] struct {
	Name       string // "<node>.<tensor>", for example "hidden1.W"
	Rows, Cols int
	Value      []T
	Grad       []T
	// Decay reports whether weight decay applies to this tensor. Directions
	// of weight-normalized layers carry Decay = false: their norm is fixed,
	// and the decay acts on their scale instead.
	Decay bool
}

func newParam[T Float](name string, rows, cols int, decay bool) *Param[T] {
	return &Param[T]{Name: name, Rows: rows, Cols: cols, Value: make([]T, rows*cols), Grad: make([]T, rows*cols), Decay: decay}
}

// Node is one step of a network: a map from a batch of rows of width In to
// a batch of rows of width Out.
//
// Batches are contiguous row-major buffers owned by the Network: a node
// reads x (rows×in) and writes y (rows×out) in Forward; in Backward it reads
// x, y and dy (rows×out) and writes dx (rows×in) and the gradients of its
// parameters. dx is nil when no one needs it (the first node). A node keeps
// no reference to the buffers after the call returns. Forward and Backward
// must allocate nothing.
//
// Custom nodes implement this interface and are added with Builder.Node;
// the conformance suite in internal/conform checks their gradients.
type Node[T Float] interface {
	Name() string
	// Kind names the type of node ("dense", "relu", ...), for model files.
	Kind() string
	// Connect is called once, by Builder.Build, with the width of the
	// node's input. It returns the width of its output or an error that
	// says what is wrong with the wiring; it allocates the parameters.
	Connect(in int) (out int, err error)
	// Params lists the node's trainable tensors; nil when it has none.
	Params() []*Param[T]
	Forward(x, y []T, rows int)
	Backward(x, y, dy, dx []T, rows int)
}
