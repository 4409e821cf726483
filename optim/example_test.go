package optim_test

import (
	"context"
	"fmt"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// Train a weight-normalized network with the square loss on the demo pump
// readings, watching the scale ρ approach its equilibrium ρ*.
func ExampleTrainer() {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		fmt.Println(err)
		return
	}
	n, _ := net.NewBuilder[float64](split.Train.Features).
		ConstantFeature("one").
		Dense("hidden", 32).ReLU("relu").
		Readout("readout", split.Train.Outputs).
		Build()
	_ = n.Init(net.InitSettings{Rho0: 1, Seed: 1})
	model, _ := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})

	var rho, rhoStar float64
	hooks := &optim.Hooks{
		Step: func(s *optim.StepInfo) error { rho, rhoStar = s.Rho, s.RhoStar; return nil },
		Epoch: func(e *optim.EpochInfo) error {
			if (e.Epoch+1)%10 == 0 {
				fmt.Printf("epoch %d: loss %.3f, ρ %.3g, ρ* %.3g, train margin ≤ 0 on %d rows\n", e.Epoch+1, e.Loss, rho, rhoStar, e.Full.Negative)
			}
			return nil
		},
		EpochMargins: true,
	}
	tr, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, split.Train, optim.Settings{
		LearningRate: 0.05, BatchSize: 32, WeightDecay: 1e-3, Epochs: 30, Seed: 1, Hooks: hooks,
	})
	if err != nil {
		fmt.Println(err)
		return
	}
	res, err := tr.Run(context.Background())
	fmt.Println(res.Status, res.Epochs, res.Steps, err)
	// Output:
	// epoch 10: loss 0.065, ρ 1.79, ρ* 1.77, train margin ≤ 0 on 5 rows
	// epoch 20: loss 0.058, ρ 1.93, ρ* 1.96, train margin ≤ 0 on 4 rows
	// epoch 30: loss 0.055, ρ 2.03, ρ* 2.06, train margin ≤ 0 on 4 rows
	// finished 30 870 <nil>
}

// Langevin noise at temperature T, with a learning rate that decays along
// a cosine.
func ExampleSettings() {
	s := optim.Settings{
		LearningRate: 0.1,
		Schedule:     optim.Cosine{Floor: 0.01},
		BatchSize:    64,
		Momentum:     0.9,
		WeightDecay:  5e-4,
		Temperature:  1e-6,
		Epochs:       50,
		Seed:         42,
	}
	fmt.Println(s.Schedule.Factor(optim.Progress{Step: 0, Steps: 1000}), s.Schedule.Factor(optim.Progress{Step: 999, Steps: 1000}))
	// Output: 1 0.01
}
