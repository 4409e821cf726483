package optim_test

import (
	"fmt"

	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// Estimate the sharpness of a least-squares objective on a batch and turn
// it into the largest stable learning rate of each update rule. With four
// invented rows the Hessian of the mean square loss is (2/4)·XᵀX =
// diag(1, 4), plus 2λ = 0.1 from the weight decay: its largest eigenvalue
// is 4.1. The estimate approaches it from below, so the tolerance is set
// well under the printed precision.
func ExampleSharpness() {
	x := []float64{
		1, 0,
		0, 2,
		-1, 0,
		0, -2,
	}
	y := []float64{1, -1, 1, -1}
	model, err := net.NewBuilder[float64](2).Readout("out", 1).Build()
	if err != nil {
		fmt.Println(err)
		return
	}
	const decay = 0.05
	est, err := optim.Sharpness[float64](model, loss.Square[float64]{}, x, y, 4,
		optim.SharpnessSettings{WeightDecay: decay, Tolerance: 1e-9})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("sharpness %.4f, converged %v\n", est.Value, est.Converged)
	fmt.Printf("stable below: gradient descent %.4f, heavy ball μ = 0.9 %.4f, Nesterov μ = 0.9 %.4f\n",
		optim.StableRate(est.Value, 0, false), optim.StableRate(est.Value, 0.9, false), optim.StableRate(est.Value, 0.9, true))
	// Output:
	// sharpness 4.1000, converged true
	// stable below: gradient descent 0.4878, heavy ball μ = 0.9 0.9268, Nesterov μ = 0.9 0.3310
}
