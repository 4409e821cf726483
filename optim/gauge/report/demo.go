package report

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

// DemoOptions sets the demo run. The zero value is the run the README's
// figures come from.
type DemoOptions struct {
	Epochs int    // zero: 30
	Seed   uint64 // zero: 1
	// TrainRows of the 1,200 embedded rows train, the rest test; zero:
	// 900.
	TrainRows int
}

// Demo trains a network on the embedded demo data (data/demo.Pumps:
// invented pump-condition readings, with sensor dropouts imputed) with a
// gauge.Recorder measuring everything at every epoch, and returns the Run
// a report shows. It is the library's one-call path from nothing to a
// report, and what the tests and the README figures are made from; a run
// of 30 epochs takes a few seconds.
//
// The network is two hidden ReLU layers of 32 behind a constant feature,
// one global scale started at ρ0 = 0.1, trained with the square loss,
// learning rate 0.05, minibatches of 32, λ = 1e-3 and no Langevin noise,
// for a fixed number of epochs: the settings are fixed, rather than those
// of the training procedure (optim/recipe, which rhomb train and rhomb
// demo -report run), so that the README's figures show one global scale at
// a constant rate and stay the same when the procedure's defaults change.
func Demo(ctx context.Context, o DemoOptions) (*Run, error) {
	if o.Epochs == 0 {
		o.Epochs = 30
	}
	if o.Seed == 0 {
		o.Seed = 1
	}
	if o.TrainRows == 0 {
		o.TrainRows = 900
	}
	split, err := demo.Pumps[float64](o.TrainRows)
	if err != nil {
		return nil, err
	}
	train, test := split.Train, split.Test
	n, err := net.NewBuilder[float64](train.Features).ConstantFeature("one").
		Dense("hidden1", 32).ReLU("relu1").Dense("hidden2", 32).ReLU("relu2").
		Readout("readout", train.Outputs).Build()
	if err != nil {
		return nil, err
	}
	const rho0, lr, batch, decay = 0.1, 0.05, 32, 1e-3
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: rho0, Seed: o.Seed}); err != nil {
		return nil, err
	}
	model, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	if err != nil {
		return nil, err
	}
	// γ is fixed here, before any margin is seen, as the bound requires.
	bound := &gauge.BoundOptions{Gamma: 0.1, Delta: 0.05}
	rec, err := gauge.NewRecorder(gauge.RecorderOptions[float64]{
		Model: model, Train: train, Test: test,
		Collapse: true, Spectra: true, Bound: bound,
	})
	if err != nil {
		return nil, err
	}
	start, err := rec.Measure()
	if err != nil {
		return nil, err
	}
	lf := loss.Square[float64]{}
	track := TrackLoss[float64](model, lf, test)
	tr, err := optim.NewTrainer[float64](model, lf, train, optim.Settings{
		LearningRate: lr, BatchSize: batch, WeightDecay: decay, Epochs: o.Epochs, Seed: o.Seed,
		Hooks: optim.Join(rec.Hooks(), track.Hooks()),
	})
	if err != nil {
		return nil, err
	}
	res, err := tr.Run(ctx)
	if err != nil {
		return nil, err
	}
	final, err := gauge.BoundOf[float64](model, train, test, *bound)
	if err != nil {
		return nil, err
	}
	return &Run{
		Title:  "rhomb demo run: invented pump-condition readings",
		Status: res.Status.String(), Epochs: res.Epochs, Steps: res.Steps,
		Network: Describe(n),
		Settings: []Setting{
			{"loss", lf.Name()},
			{"normalization", "one global scale ρ, directions on the unit sphere (multiplier)"},
			{"initial scale ρ0", fmt.Sprint(rho0)},
			{"learning rate", fmt.Sprint(lr)},
			{"minibatch", fmt.Sprintf("%d rows, shuffled epochs", batch)},
			{"weight decay λ", fmt.Sprint(decay)},
			{"temperature", "0 (no Langevin noise)"},
			{"epochs", fmt.Sprint(o.Epochs)},
			{"seed", fmt.Sprint(o.Seed)},
			{"bound", fmt.Sprintf("γ = %v fixed in advance, δ = %v", bound.Gamma, bound.Delta)},
		},
		Data: DescribeData(split.Table, "imputed: the training rows' mean (numeric) or most frequent value (categorical)",
			Named[float64]{"training", train}, Named[float64]{"test", test}),
		History: rec.History(), HeldoutLoss: track.Loss, Start: &start, Bound: final,
		Confusion: []Confusion{ConfusionOf[float64](model, "training", train), ConfusionOf[float64](model, "test", test)},
		Notes:     []string{"The demo data are invented: a model trained on them says nothing about real machinery."},
	}, nil
}
