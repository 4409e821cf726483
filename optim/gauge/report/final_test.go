package report_test

import (
	"context"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
	"github.com/rhomb/rhomb/optim/gauge/report"
)

// When the recorder skipped the last epoch's whole-set measures,
// FinalRecord measures the final weights itself: its training margins are
// those gauge.MarginsOf finds on the model after the run, and it keeps
// the last epoch's trainer values. When the last epoch was measured, it
// is that epoch's record itself.
func TestFinalRecord(t *testing.T) {
	split, err := demo.Pumps[float64](900)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct{ epochs, every int }{{3, 3}, {4, 3}} {
		n, err := net.NewBuilder[float64](split.Train.Features).ConstantFeature("one").
			Dense("hidden", 16).ReLU("relu").Readout("readout", split.Train.Outputs).Build()
		if err != nil {
			t.Fatal(err)
		}
		if err := n.Init(net.InitSettings{Rho0: 1, Seed: 1}); err != nil {
			t.Fatal(err)
		}
		model, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
		if err != nil {
			t.Fatal(err)
		}
		rec, err := gauge.NewRecorder(gauge.RecorderOptions[float64]{Model: model, Train: split.Train, EpochEvery: c.every})
		if err != nil {
			t.Fatal(err)
		}
		tr, err := optim.NewTrainer[float64](model, loss.Square[float64]{}, split.Train, optim.Settings{
			LearningRate: 0.05, BatchSize: 64, Epochs: c.epochs, Seed: 1, Hooks: rec.Hooks()})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := tr.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		f, err := report.FinalRecord(rec)
		if err != nil {
			t.Fatal(err)
		}
		last := rec.History().Last()
		// Epochs 0, 3, 6, ... are measured (EpochEvery): the last of 4
		// epochs (index 3) is, the last of 3 (index 2) is not.
		if measured := (c.epochs-1)%c.every == 0; measured != (f == last) {
			t.Errorf("%d epochs every %d: FinalRecord returned the last epoch: %v; want %v", c.epochs, c.every, f == last, measured)
		}
		want, err := gauge.MarginsOf[float64](model, split.Train, gauge.MarginOptions{})
		if err != nil {
			t.Fatal(err)
		}
		// The same weights and the same code path: the minimum and
		// mean are the same numbers, bit for bit.
		if f.Train == nil || f.Train.All.Min != want.All.Min || f.Train.All.Mean != want.All.Mean {
			t.Errorf("%d epochs: final margins %+v; want %+v", c.epochs, f.Train, want.All)
		}
		if f.Epoch != last.Epoch || f.Loss != last.Loss || f.Steps != last.Steps {
			t.Errorf("%d epochs: final record epoch %d steps %d loss %v; want the last epoch's %d %d %v", c.epochs, f.Epoch, f.Steps, f.Loss, last.Epoch, last.Steps, last.Loss)
		}
	}
}
