// Command demo trains a small classifier on rhomb's embedded demo data —
// readings from an invented fleet of water pumps (see package data/demo) —
// through rhomb's training procedure (package optim/recipe), and prints,
// epoch by epoch, the loss, the network's scale ρ with its equilibrium ρ*,
// the normalized margins and the validation accuracy; then the epoch it
// kept and the test accuracy.
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

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/data/prep"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/recipe"
)

func main() {
	log.SetFlags(0)
	log.SetPrefix("demo: ")
	d := recipe.Defaults()
	var (
		epochs = flag.Int("epochs", 40, "most epochs to train (the run stops earlier after the patience)")
		lr     = flag.Float64("lr", 0, "learning rate η (0: measured from the loss curvature)")
		batch  = flag.Int("batch", d.Batch, "rows per minibatch")
		decay  = flag.Float64("decay", d.Decay, "weight decay λ on the scales (λΣρ_k²)")
		temp   = flag.Float64("temp", 0, "Langevin temperature T (noise √(2ηT) per step)")
		rho0   = flag.Float64("rho0", d.Rho0, "initial scale ρ0 = ∏‖W_k‖")
		width  = flag.Int("width", d.Hidden[0], "units per hidden layer (two layers)")
		seed   = flag.Uint64("seed", 1, "seed for the split, initialization, batches and noise")
		logTo  = flag.String("log", "", "write per-step diagnostics as JSON Lines to this file")
	)
	flag.Parse()
	plan := recipe.Plan{Epochs: *epochs, LearningRate: *lr, Batch: *batch, Decay: *decay, Temperature: *temp,
		Rho0: *rho0, Hidden: []int{*width, *width}, Seed: *seed}
	if *decay == 0 {
		plan.Decay = -1 // none
	}
	if err := run(os.Stdout, plan, *logTo); err != nil {
		log.Fatal(err)
	}
}

// run trains the demo through the training procedure (package
// optim/recipe): the embedded table split into training, validation and
// test rows, the best epoch on the validation rows kept.
func run(w io.Writer, plan recipe.Plan, logTo string) error {
	tab, err := demo.Table()
	if err != nil {
		return err
	}
	p, err := recipe.Prepare[float64](tab, recipe.Split{Holdout: 0.2, Test: 0.25, Seed: plan.Seed, Prep: prep.Options{Impute: true}})
	if err != nil {
		return err
	}
	fmt.Fprintf(w, "pump condition demo: %d training, %d validation and %d test readings, %d features, classes %v\n",
		p.Train.Rows, p.Val.Rows, p.Test.Rows, p.Train.Features, p.Classes)

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
	fmt.Fprintf(w, "%5s  %8s  %7s  %7s  %8s  %9s  %9s  %9s  %9s\n", "epoch", "loss", "ρ", "ρ*", "Σ‖V̇_k‖", "mean marg", "min marg", "train acc", "valid acc")
	obs := &recipe.Observer{
		Hooks: hooks,
		Note:  func(s string) { fmt.Fprintf(w, "  · %s\n", s) },
		Epoch: func(r *recipe.EpochReport) error {
			e := r.Info
			best := ""
			if r.Best {
				best = "  best"
			}
			fmt.Fprintf(w, "%5d  %8.5f  %7.4f  %7.4f  %8.4f  %9.5f  %9.5f  %9.3f  %9.3f%s\n",
				e.Epoch+1, e.Loss, e.Rho, starSum/float64(steps), speedSum/float64(steps),
				e.Full.Mean, e.Full.Min, 1-float64(e.Full.Negative)/float64(e.Full.Rows), r.Score.Accuracy, best)
			starSum, speedSum, steps = 0, 0, 0
			return nil
		},
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	f, err := recipe.Fit(ctx, p.Train, p.Val, plan, false, obs)
	if err != nil && ctx.Err() == nil {
		return err
	}
	out := f.Outcome
	fmt.Fprintf(w, "run ended (%s) after %d epochs (%d steps); kept epoch %d; ρ* and Σ‖V̇_k‖ are epoch means over minibatches\n",
		out.Stop, out.Result.Epochs, out.Result.Steps, out.Best.Epoch)
	fmt.Fprintf(w, "test accuracy %.3f on %d readings\n", recipe.Evaluate(f.Model(), p.Test).Accuracy(), p.Test.Rows)
	if !f.Health.OK() {
		fmt.Fprintf(w, "warning: %s\n", f.Health)
	}
	return nil
}
