// Command demo trains a small classifier on rhomb's embedded demo data —
// readings from an invented fleet of water pumps (see package data/demo) —
// and prints, epoch by epoch, the loss, the network's scale ρ with its
// equilibrium ρ*, and the normalized margins; then the test accuracy.
//
// It writes nothing unless asked (-log FILE writes every step's
// diagnostics as JSON Lines).
//
//	go run ./examples/demo
//	go run ./examples/demo -epochs 60 -decay 1e-3 -temp 1e-7
//
// The pumps are invented; a classifier trained on them says nothing about
// real machinery. A condition classifier is no safety guarantee: validate on
// your own data and follow the applicable codes and licensed practice before
// its output drives an alarm or a shutdown.
package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"log"
	"os"
	"os/signal"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

func main() {
	log.SetFlags(0)
	log.SetPrefix("demo: ")
	var (
		epochs = flag.Int("epochs", 40, "epochs to train")
		lr     = flag.Float64("lr", 0.05, "learning rate η")
		batch  = flag.Int("batch", 32, "rows per minibatch")
		decay  = flag.Float64("decay", 1e-3, "weight decay λ on the scales (λρ²)")
		temp   = flag.Float64("temp", 0, "Langevin temperature T (noise √(2ηT) per step)")
		rho0   = flag.Float64("rho0", 0.1, "initial scale ρ0 = ∏‖W_k‖")
		width  = flag.Int("width", 32, "units per hidden layer")
		seed   = flag.Uint64("seed", 1, "seed for initialization, batches and noise")
		logTo  = flag.String("log", "", "write per-step diagnostics as JSON Lines to this file")
	)
	flag.Parse()
	if err := run(os.Stdout, *epochs, *lr, *batch, *decay, *temp, *rho0, *width, *seed, *logTo); err != nil {
		log.Fatal(err)
	}
}

func run(w io.Writer, epochs int, lr float64, batch int, decay, temp, rho0 float64, width int, seed uint64, logTo string) error {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		return err
	}
	tr := split.Train
	fmt.Fprintf(w, "pump condition demo: %d training and %d test readings, %d features, classes %v\n",
		tr.Rows, split.Test.Rows, tr.Features, tr.Classes)

	n, err := net.NewBuilder[float64](tr.Features).
		ConstantFeature("one").
		Dense("hidden1", width).ReLU("relu1").
		Dense("hidden2", width).ReLU("relu2").
		Readout("readout", tr.Outputs).
		Build()
	if err != nil {
		return err
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: rho0, Seed: seed}); err != nil {
		return err
	}
	model, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	if err != nil {
		return err
	}

	// The step hook averages ρ* and the directions' speed over each epoch:
	// both are computed on minibatches and are noisy step to step.
	hooks := &optim.Hooks{EpochMargins: true}
	var starSum, speedSum float64
	var steps int
	observe := func(s *optim.StepInfo) {
		starSum += s.RhoStar
		for _, v := range s.DirSpeed {
			speedSum += v
		}
		steps++
	}
	hooks.Step = func(s *optim.StepInfo) error { observe(s); return nil }
	if logTo != "" {
		f, err := os.Create(logTo)
		if err != nil {
			return err
		}
		defer f.Close()
		jl := optim.JSONLines(f, 1)
		hooks.Step = func(s *optim.StepInfo) error {
			observe(s)
			return jl.Step(s)
		}
	}
	fmt.Fprintf(w, "%5s  %8s  %7s  %7s  %8s  %9s  %9s  %9s\n", "epoch", "loss", "ρ", "ρ*", "Σ‖V̇_k‖", "mean marg", "min marg", "train acc")
	hooks.Epoch = func(e *optim.EpochInfo) error {
		fmt.Fprintf(w, "%5d  %8.5f  %7.4f  %7.4f  %8.4f  %9.5f  %9.5f  %9.3f\n",
			e.Epoch+1, e.Loss, e.Rho, starSum/float64(steps), speedSum/float64(steps),
			e.Full.Mean, e.Full.Min, 1-float64(e.Full.Negative)/float64(e.Full.Rows))
		starSum, speedSum, steps = 0, 0, 0
		return nil
	}
	t, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, tr, optim.Settings{
		LearningRate: lr, BatchSize: batch, WeightDecay: decay, Temperature: temp,
		Epochs: epochs, Seed: seed, Hooks: hooks,
	})
	if err != nil {
		return err
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	res, err := t.Run(ctx)
	if err != nil && res.Status != optim.Canceled {
		return err
	}
	fmt.Fprintf(w, "run %s after %d epochs (%d steps); ρ* and Σ‖V̇_k‖ are epoch means over minibatches\n", res.Status, res.Epochs, res.Steps)
	fmt.Fprintf(w, "test accuracy %.3f on %d readings\n", accuracy(model, split.Test), split.Test.Rows)
	return nil
}

func accuracy(m optim.Model[float64], s *data.Set[float64]) float64 {
	out := m.Forward(s.X, s.Rows)
	right := 0
	for r := range s.Rows {
		if data.ClassOf(out[r*s.Outputs:(r+1)*s.Outputs]) == s.Class(r) {
			right++
		}
	}
	return float64(right) / float64(s.Rows)
}
