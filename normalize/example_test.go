package normalize_test

import (
	"fmt"

	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
)

// Split every layer into a scale and a unit direction. The function is
// unchanged; the trainable parameters become ρ_k and V_k.
func ExampleWrap() {
	n, _ := net.NewBuilder[float64](4).Dense("hidden", 6).ReLU("relu").Readout("readout", 1).Build()
	_ = n.Init(net.InitSettings{Rho0: 0.5, Seed: 3})
	w, err := normalize.Wrap(n, normalize.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	for _, p := range w.Params() {
		fmt.Printf("%-12s %d×%d decay=%v\n", p.Name, p.Rows, p.Cols, p.Decay)
	}
	fmt.Printf("ρ = %.3f, ‖V_k‖ = %.3f\n", w.Rho(), w.DirectionNorms(nil))
	// Output:
	// hidden.rho   1×1 decay=true
	// hidden.V     6×4 decay=false
	// readout.rho  1×1 decay=true
	// readout.V    1×6 decay=false
	// ρ = 0.500, ‖V_k‖ = [1.000 1.000]
}

// One scale for the whole network, with the readout left as a plain weight.
func ExampleOptions_global() {
	n, _ := net.NewBuilder[float64](4).Dense("hidden", 6).ReLU("relu").Readout("readout", 3).Build()
	_ = n.Init(net.InitSettings{Seed: 3})
	w, _ := normalize.Wrap(n, normalize.Options{Scale: normalize.Global, SkipReadout: true})
	for _, p := range w.Params() {
		fmt.Println(p.Name)
	}
	// Output:
	// rho
	// hidden.V
	// readout.W
}
