package sweep_test

import (
	"context"
	"fmt"
	"os"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/sweep"
)

// Sweep ρ0 and λ over two seeds on the demo pump readings, using the last
// 300 of the first 900 rows for validation, and read the ranking.
func Example() {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		fmt.Println(err)
		return
	}
	rows := make([]int, 900)
	for i := range rows {
		rows[i] = i
	}
	train, val := split.Train.Subset(rows[:600]), split.Train.Subset(rows[600:])

	gr := &sweep.Grid{
		Rho0:        []float64{0.1, 1},
		WeightDecay: []float64{1e-4, 1e-2},
		Seeds:       []uint64{1, 2},
		Base:        optim.Settings{LearningRate: 0.05, BatchSize: 32, Epochs: 5},
	}
	trainOne := func(ctx context.Context, p sweep.Point) (sweep.Result, error) {
		n, err := net.NewBuilder[float64](train.Features).ConstantFeature("one").
			Dense("hidden", 16).ReLU("relu").Readout("readout", train.Outputs).Build()
		if err != nil {
			return sweep.Result{}, err
		}
		if err := n.Init(net.InitSettings{Rho0: p.Rho0, Seed: p.Seed}); err != nil {
			return sweep.Result{}, err
		}
		model, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			return sweep.Result{}, err
		}
		tr, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, train, gr.Settings(p))
		if err != nil {
			return sweep.Result{}, err
		}
		res, err := tr.Run(ctx)
		if err != nil {
			return sweep.Result{}, err
		}
		r, err := sweep.Measure(model, train, val, gauge.BoundOptions{Gamma: 0.1})
		sweep.FromRun(&r, res)
		return r, err
	}
	results, err := sweep.Run(context.Background(), gr.Points(), trainOne, 0)
	if err != nil {
		fmt.Println(err)
		return
	}
	ranked := sweep.Rank(results)
	best := ranked[0]
	fmt.Printf("%d runs; best: ρ0 = %g, λ = %g, seed %d\n", len(ranked), best.Rho0, best.WeightDecay, best.Seed)
	fmt.Printf("validation accuracy %.3f, min training margin %.3f\n", best.ValAccuracy, best.MarginMin)
	sweep.WriteTable(os.Stdout, ranked, 2)
	// Output:
	// 8 runs; best: ρ0 = 1, λ = 0.0001, seed 1
	// validation accuracy 0.997, min training margin -0.212
	//   rank  point  ρ0       λ     η  T  seed  validation   train  min margin  mean margin   bound      ρ status
	//      1      4   1  0.0001  0.05  0     1      0.9967  0.9933     -0.2122       0.4769  107.42   1.65 finished
	//      2      6   1    0.01  0.05  0     1      0.9967  0.9933     -0.2175        0.487  107.42  1.579 finished
	// (6 more runs not shown)
}
