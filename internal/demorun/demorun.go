// Package demorun trains the fixed demo run the run report's tests and
// the README's report figures are made from. It is not API: the product's
// path to a report is rhomb train -report (or rhomb demo -report).
package demorun

import (
	"context"
	"fmt"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/report"
)

// Options sets the demo run. The zero value is the run the README's
// figures come from.
type Options struct {
	Epochs int    // zero: 30
	Seed   uint64 // zero: 1
	// TrainRows of the 1,200 embedded rows train, the rest test; zero:
	// 900.
	TrainRows int
}

// Run trains a network on the embedded demo data (data/demo.Pumps:
// invented pump-condition readings, with sensor dropouts imputed) with a
// gauge.Recorder measuring everything at every epoch, and returns the Run
// a report shows: what the report's tests and the README figures are made
// from; a run of 30 epochs takes a few seconds.
//
// The network is two hidden ReLU layers of 32 behind a constant feature,
// one global scale started at ρ0 = 0.1, trained with the square loss,
// learning rate 0.05, minibatches of 32, λ = 1e-3 and no Langevin noise,
// for a fixed number of epochs: the settings are fixed, rather than those
// of the training procedure (optim/recipe, which rhomb train and rhomb
// demo -report run), so that the README's figures show one global scale at
// a constant rate and stay the same when the procedure's defaults change.
func Run(ctx context.Context, o Options) (*report.Run, error) {
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
	track := report.TrackLoss[float64](model, lf, test)
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
	return &report.Run{
		Title:  "rhomb demo run: invented pump-condition readings",
		Status: res.Status.String(), Epochs: res.Epochs, Steps: res.Steps,
		Network: report.Describe(n),
		Settings: []report.Setting{
			{Name: "loss", Value: lf.Name()},
			{Name: "normalization", Value: "one global scale ρ, directions on the unit sphere (multiplier)"},
			{Name: "initial scale ρ0", Value: fmt.Sprint(rho0)},
			{Name: "learning rate", Value: fmt.Sprint(lr)},
			{Name: "minibatch", Value: fmt.Sprintf("%d rows, shuffled epochs", batch)},
			{Name: "weight decay λ", Value: fmt.Sprint(decay)},
			{Name: "temperature", Value: "0 (no Langevin noise)"},
			{Name: "epochs", Value: fmt.Sprint(o.Epochs)},
			{Name: "seed", Value: fmt.Sprint(o.Seed)},
			{Name: "bound", Value: fmt.Sprintf("γ = %v fixed in advance, δ = %v", bound.Gamma, bound.Delta)},
		},
		Data: report.DescribeData(split.Table, "imputed: the training rows' mean (numeric) or most frequent value (categorical)",
			report.Named[float64]{Name: "training", Set: train}, report.Named[float64]{Name: "test", Set: test}),
		History: rec.History(), HeldoutLoss: track.Loss, Start: &start, Bound: final,
		Confusion: []report.Confusion{report.ConfusionOf[float64](model, "training", train), report.ConfusionOf[float64](model, "test", test)},
		Notes:     []string{"The demo data are invented: a model trained on them says nothing about real machinery."},
	}, nil
}
