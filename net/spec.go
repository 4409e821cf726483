package net

import (
	"errors"
	"fmt"
	"github.com/rhomb/rhomb/net/schema"
)

// NodeSpec describes one built-in node: enough to build it again. Model
// files store a network as its input width and the list of its NodeSpecs;
// the type, and the names of the kinds, belong to the model file format
// (package net/schema).
type NodeSpec = schema.Node

// ErrCustomNode is returned by Spec for a network holding a node type of
// the caller's own, which has no description rhomb can rebuild.
var ErrCustomNode = errors.New("net: the network has a custom node, which cannot be described for rebuilding")

// Spec describes the network's nodes in order.
func (n *Network[T]) Spec() ([]NodeSpec, error) {
	out := make([]NodeSpec, 0, len(n.nodes))
	for _, nd := range n.nodes {
		s := NodeSpec{Name: nd.Name(), Kind: nd.Kind()}
		switch v := nd.(type) {
		case *ConstantOne[T], *ReLU[T]:
		case *Dense[T]:
			s.Units = v.Out()
		case *SmoothReLU[T]:
			s.Sharpness = v.Sharpness()
		case *BatchNorm[T]:
			o := v.Settings()
			s.Scale, s.Shift, s.Epsilon = o.Scale, o.Shift, o.Epsilon
		case *PolyReLU[T]:
			s.Degree = v.Degree()
			s.Lo, s.Hi = v.Interval()
			s.Fit = v.Fit().String()
			s.Coefficients = v.Coefficients()
		default:
			return nil, fmt.Errorf("%w: node %q of kind %q", ErrCustomNode, nd.Name(), nd.Kind())
		}
		out = append(out, s)
	}
	return out, nil
}

// FromSpec builds a network from its input width and node descriptions,
// with zero weights. Errors are *BuildError naming the node.
func FromSpec[T Float](inputs int, specs []NodeSpec) (*Network[T], error) {
	b := NewBuilder[T](inputs)
	for i, s := range specs {
		switch s.Kind {
		case schema.KindConstantOne:
			b.ConstantFeature(s.Name)
		case schema.KindDense:
			b.Dense(s.Name, s.Units)
		case schema.KindReadout:
			b.Readout(s.Name, s.Units)
		case schema.KindReLU:
			b.ReLU(s.Name)
		case schema.KindSmoothReLU:
			b.SmoothReLU(s.Name, s.Sharpness)
		case schema.KindBatchNorm:
			b.Node(NewBatchNorm[T](s.Name, BatchNormSettings{Scale: s.Scale, Shift: s.Shift, Epsilon: s.Epsilon}))
		case schema.KindPolyReLU:
			fit, err := ParseFit(s.Fit)
			if err != nil {
				return nil, &BuildError{Node: s.Name, Index: i, Err: err}
			}
			b.PolyReLU(s.Name, s.Degree, s.Lo, s.Hi, fit)
		default:
			return nil, &BuildError{Node: s.Name, Index: i, Err: fmt.Errorf("unknown node kind %q", s.Kind)}
		}
	}
	return b.Build()
}

// ParseFit is the inverse of Fit.String.
func ParseFit(s string) (Fit, error) {
	for _, f := range []Fit{FitLeastSquares, FitInterpolation} {
		if f.String() == s {
			return f, nil
		}
	}
	return 0, fmt.Errorf("unknown polynomial fit %q (want %q or %q)", s, FitLeastSquares, FitInterpolation)
}
