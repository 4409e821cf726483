package gauge

import (
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data/demo"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// A Recorder on the demo data (invented; this checks bookkeeping, which
// holds for any data). The whole-set margins it computes must agree with
// those the trainer computes itself for EpochInfo.Full (optim's own code
// path), and every requested measure must be present.
//
// The cross-check uses a plain network: with a normalize.Net the trainer
// (optim/trainer.go fullMargins, as of this writing) reads ρ from the base
// network before the Forward that writes W = ρ·V, so it divides the new
// outputs by the previous step's ρ; TestMarginsWrappedAfterUpdate checks
// gauge's value for that case against the definition directly.
func TestRecorderOnDemo(t *testing.T) {
	testRecorderOnDemo(t, false)
}

func TestMarginsWrappedAfterUpdate(t *testing.T) {
	testRecorderOnDemo(t, true)
}

func testRecorderOnDemo(t *testing.T, wrapped bool) {
	split, err := demo.Pumps[float64](600)
	if err != nil {
		t.Fatal(err)
	}
	n, _ := net.NewBuilder[float64](split.Train.Features).ConstantFeature("one").
		Dense("hidden", 16).ReLU("relu").Readout("readout", split.Train.Outputs).Build()
	_ = n.Init(net.InitSettings{Rho0: 1, Seed: 1})
	every := 1
	if wrapped {
		every = 3 // measures at epochs 0 and 3 of 4
	}
	var m optim.Model[float64] = n
	if wrapped {
		m, _ = normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	}
	rec, err := NewRecorder(RecorderOptions[float64]{
		Model: m, Train: split.Train, Test: split.Test, StepEvery: 5,
		Collapse: true, Spectra: true, Bound: &BoundOptions{Gamma: 0.05}, EpochEvery: every,
	})
	if err != nil {
		t.Fatal(err)
	}
	var full []optim.Margins
	h := rec.Hooks()
	h.EpochMargins = true
	inner := h.Epoch
	h.Epoch = func(e *optim.EpochInfo) error {
		full = append(full, *e.Full)
		return inner(e)
	}
	const epochs = 4
	tr, err := optim.NewTrainer[float64](m, loss.Square[float64]{}, split.Train, optim.Settings{
		LearningRate: 0.05, BatchSize: 32, WeightDecay: 1e-3, Epochs: epochs, Seed: 1, Hooks: h,
	})
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	hist := rec.History()
	if wrapped {
		// The definition: outputs of the current function over ρ = ∏‖W_k‖_F
		// of that same function (read after the Forward that syncs W).
		out := m.Forward(split.Train.X, split.Train.Rows)
		rho, k := n.Rho(), split.Train.Outputs
		mean := 0.0
		for r := range split.Train.Rows {
			mean += optim.Margin(out[r*k:(r+1)*k], split.Train.Y[r*k:(r+1)*k], rho) / float64(split.Train.Rows)
		}
		if hist.Epochs[1].Train != nil || hist.Epochs[2].Spectra != nil || hist.Epochs[3].Train == nil {
			t.Errorf("EpochEvery 3: measures at the wrong epochs")
		}
		got := hist.Last().Train.All.Mean
		if math.Abs(got-mean) > 1e3*eps {
			t.Errorf("wrapped: gauge mean margin %.17g, definition %.17g", got, mean)
		}
		return
	}
	if len(hist.Epochs) != epochs || len(hist.Steps) != res.Steps/5 {
		t.Fatalf("%d epoch and %d step records for %d epochs, %d steps", len(hist.Epochs), len(hist.Steps), epochs, res.Steps)
	}
	for i, r := range hist.Epochs {
		// Same rows, same weights, different code: the mean over 600 rows
		// agrees to 600·ε relative; the minimum is one row's value.
		if math.Abs(r.Train.All.Min-full[i].Min) > 1e3*eps || math.Abs(r.Train.All.Mean-full[i].Mean) > 1e3*eps || r.Train.All.Errors != full[i].Negative {
			t.Errorf("epoch %d: gauge %+v, trainer %+v", i, r.Train.All, full[i])
		}
		if r.Collapse == nil || len(r.Spectra) != 2 || r.Bound == nil || r.Test == nil || math.IsNaN(r.TestError) || r.Bound.TestError != r.TestError {
			t.Errorf("epoch %d: missing measures %+v", i, r)
		}
		if math.IsNaN(r.RhoStarMean) || len(r.LayerRho) != 2 {
			t.Errorf("epoch %d: ρ* mean %v, ρ_k %v", i, r.RhoStarMean, r.LayerRho)
		}
	}
	last := hist.Last()
	if !(last.Bound.Bound >= last.Bound.RampLoss) {
		t.Errorf("bound %+v", last.Bound)
	}
	if _, err := NewRecorder(RecorderOptions[float64]{Spectra: true}); err == nil {
		t.Error("spectra without a model accepted")
	}
}
