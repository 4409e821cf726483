package optim_test

import (
	"context"
	"testing"

	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// TestStateResume: a run stopped mid-epoch, whose state and parameters are
// copied into a fresh trainer and model, ends with the same bits as a run
// that was never stopped.
func TestStateResume(t *testing.T) {
	set := randomSet(6, 90, 5, 3)
	s := optim.Settings{LearningRate: 0.05, BatchSize: 16, Momentum: 0.8, Nesterov: true, Temperature: 1e-5, WeightDecay: 1e-3, Epochs: 5, Seed: 4}
	mk := func() *normalize.Net[float64] {
		w, err := normalize.Wrap(mlp(t, []int{5, 9, 3}, 2, 1), normalize.Options{Scale: normalize.Global})
		if err != nil {
			t.Fatal(err)
		}
		return w
	}
	whole := mk()
	train(t, whole, set, s)

	first := mk()
	stop := s
	stop.Hooks = &optim.Hooks{Step: func(i *optim.StepInfo) error {
		if i.Step == 14 { // epoch 2, step 2 of 6
			return optim.ErrStop
		}
		return nil
	}}
	tr, err := optim.NewTrainer[float64](first, loss.Square[float64]{}, set, stop)
	if err != nil {
		t.Fatal(err)
	}
	if res, err := tr.Run(context.Background()); err != nil || res.Status != optim.Stopped {
		t.Fatalf("%+v %v", res, err)
	}
	state := tr.State()

	second := mk()
	for i, p := range first.Params() {
		copy(second.Params()[i].Value, p.Value)
	}
	tr2, err := optim.NewTrainer[float64](second, loss.Square[float64]{}, set, s)
	if err != nil {
		t.Fatal(err)
	}
	if err := tr2.Restore(state); err != nil {
		t.Fatal(err)
	}
	if res, err := tr2.Run(context.Background()); err != nil || res.Status != optim.Finished || res.Steps != 30 {
		t.Fatalf("resumed: %+v %v", res, err)
	}
	if !sameBits(weights(whole.Params()), weights(second.Params())) {
		t.Error("resumed run differs from the uninterrupted one")
	}

	// A state from other data is refused.
	other, _ := optim.NewTrainer[float64](mk(), loss.Square[float64]{}, randomSet(6, 80, 5, 3), s)
	if err := other.Restore(state); err == nil {
		t.Error("a state for 90 rows restored into a trainer over 80")
	}
}
