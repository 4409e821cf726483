package net_test

import (
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/net"
)

// Build a bias-free ReLU network, start it at a small scale ρ0 and run a
// batch of two rows through it.
func ExampleBuilder() {
	n, err := net.NewBuilder[float64](3).
		ConstantFeature("one").
		Dense("hidden", 8).ReLU("relu").
		Readout("readout", 2).
		Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: 0.01, Seed: 1}); err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("inputs %d, outputs %d, ρ = %.4f\n", n.In(), n.Out(), n.Rho())
	for _, p := range n.Params() {
		fmt.Printf("%s: %d×%d\n", p.Name, p.Rows, p.Cols)
	}
	out := n.Forward([]float64{0.5, -1, 2, 1, 0, 0}, 2)
	fmt.Println(len(out), "outputs")
	// Output:
	// inputs 3, outputs 2, ρ = 0.0100
	// hidden.W: 8×4
	// readout.W: 2×8
	// 4 outputs
}

// Wiring mistakes are reported by Build with the node's name.
func ExampleBuildError() {
	_, err := net.NewBuilder[float32](4).
		Dense("hidden", 16).ReLU("hidden").
		Readout("readout", 3).
		Build()
	fmt.Println(err)
	fmt.Println(errors.Is(err, net.ErrDuplicateName))
	// Output:
	// net: node 1 "hidden": name already used by an earlier node
	// true
}
