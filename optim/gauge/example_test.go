package gauge_test

import (
	"context"
	"fmt"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
)

// Record a run on the demo pump readings and read its last epoch: the
// margins, the scale against its equilibrium, collapse, and the bound
// beside the test error.
func ExampleRecorder() {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		fmt.Println(err)
		return
	}
	n, _ := net.NewBuilder[float64](split.Train.Features).ConstantFeature("one").
		Dense("hidden", 32).ReLU("relu").Readout("readout", split.Train.Outputs).Build()
	_ = n.Init(net.InitSettings{Rho0: 1, Seed: 1})
	model, _ := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})

	rec, err := gauge.NewRecorder(gauge.RecorderOptions[float64]{
		Model: model, Train: split.Train, Test: split.Test,
		StepEvery: 10, EpochEvery: 5, Collapse: true, Spectra: true,
		Bound: &gauge.BoundOptions{Gamma: 0.1, Delta: 0.05},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	tr, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, split.Train, optim.Settings{
		LearningRate: 0.05, BatchSize: 32, WeightDecay: 1e-3, Epochs: 30, Seed: 1, Hooks: rec.Hooks(),
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	if _, err := tr.Run(context.Background()); err != nil {
		fmt.Println(err)
		return
	}
	h := rec.History()
	r := h.Epochs[25] // the last epoch with whole-set measures (every 5th)
	fmt.Printf("epoch %d: ρ %.2f, mean ρ* %.2f, mean gap %.3f\n", r.Epoch+1, r.Rho, r.RhoStarMean, r.GapMean)
	fmt.Printf("train margin: min %.3f, median %.3f, %.1f%% below γ=0.1\n", r.Train.All.Min, r.Train.All.Quantiles[3], 100*r.Train.All.FracBelow)
	fmt.Printf("NC1 %.2f, NC2 %.2f, NC3 %.2f, NC4 %.3f\n", r.Collapse.NC1, r.Collapse.NC2Norm, r.Collapse.NC3, r.Collapse.NC4)
	fmt.Printf("effective rank of hidden.V: %.1f of %d\n", r.Spectra[0].EffectiveRank, len(r.Spectra[0].Values))
	fmt.Printf("test error %.3f, bound %.1f (loose)\n", r.TestError, r.Bound.Bound)
	fmt.Println("equilibrium reached:", h.EquilibriumStep > 0)
	// Output:
	// epoch 26: ρ 1.99, mean ρ* 2.01, mean gap 0.026
	// train margin: min -0.104, median 0.452, 0.4% below γ=0.1
	// NC1 0.05, NC2 0.30, NC3 0.71, NC4 0.998
	// effective rank of hidden.V: 6.7 of 12
	// test error 0.007, bound 87.7 (loose)
	// equilibrium reached: false
}

// The neural-collapse measures of an exactly collapsed configuration: two
// rows per class at the vertices of a triangle centred at 0 (a simplex
// equiangular tight frame) and a readout equal to the class means.
func ExampleCollapse() {
	h := []float64{
		0, 1, 0, 1, // class 0
		-0.8660254037844386, -0.5, -0.8660254037844386, -0.5, // class 1
		0.8660254037844386, -0.5, 0.8660254037844386, -0.5, // class 2
	}
	rep, err := gauge.Collapse(gauge.Features{
		H: h, Rows: 6, Width: 2, Classes: 3, Labels: []int{0, 0, 1, 1, 2, 2},
		Readout: []float64{0, 1, -0.8660254037844386, -0.5, 0.8660254037844386, -0.5},
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("NC1 %.3f NC2 %.3f/%.3f NC3 %.3f NC4 %.0f\n", rep.NC1, rep.NC2Norm, rep.NC2Angle, rep.NC3, rep.NC4)
	// Output: NC1 0.000 NC2 0.000/0.000 NC3 0.000 NC4 1
}

// The margin bound on a small sample: it is stated term by term.
func ExampleMarginBound() {
	margins := []float64{0.5, -0.1, 0.2, 1.0}
	r, _ := gauge.MarginBound(margins, 2, 2, 2, true, gauge.BoundOptions{Gamma: 0.4, Delta: 0.1})
	fmt.Printf("ramp loss %.3f + complexity %.2f + confidence %.2f = %.2f\n", r.RampLoss, r.Complexity, r.Confidence, r.Bound)
	// Output: ramp loss 0.375 + complexity 13.33 + confidence 1.84 = 15.54
}

// Watch for equilibrium during a run and stop there.
func ExampleEquilibrium() {
	eq := gauge.NewEquilibrium(gauge.EquilibriumOptions{GapTol: 0.02, Window: 100, Stop: true})
	hooks := &optim.Hooks{Step: eq.Hook()}
	_ = hooks // pass in optim.Settings.Hooks
	o := eq.Options()
	fmt.Println(o.GapTol, o.SpeedTol, o.Window)
	// Output: 0.02 0.05 100
}
