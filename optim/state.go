package optim

import (
	"fmt"
	"math"
)

// State is everything a Trainer carries from step to step besides the
// model's parameters: counters, the epoch's batch order, both random
// streams and the momentum buffers. Saved with the parameters (see package
// optim/modelfile) it lets a run resume and reach the same bits as a run
// that was never interrupted, given the same model, data and Settings.
type State struct {
	Step      int     `json:"step"`
	Epoch     int     `json:"epoch"`
	InEpoch   int     `json:"in_epoch"`   // steps taken in the current epoch
	EpochLoss float64 `json:"epoch_loss"` // Σ rows·loss so far in the epoch
	EpochRows int     `json:"epoch_rows"`
	// LastLoss is the mean loss of the last completed epoch, NaN before
	// the first.
	LastLoss float64 `json:"-"`
	// Order is the current permutation of the rows (shuffled sampling).
	Order []int `json:"-"`
	// BatchRNG and NoiseRNG are the PCG states, as rand.PCG.MarshalBinary
	// writes them.
	BatchRNG []byte `json:"batch_rng"`
	NoiseRNG []byte `json:"noise_rng"`
	// Velocity holds the momentum buffers, one per model parameter in
	// Params order, widened to float64 (exact for float32); nil without
	// momentum.
	Velocity [][]float64 `json:"-"`
}

// State returns a copy of the trainer's state.
func (t *Trainer[T]) State() State {
	s := State{
		Step: t.step, Epoch: t.epoch, InEpoch: t.inEpoch,
		EpochLoss: t.epochLoss, EpochRows: t.epochRows, LastLoss: t.lastLoss,
		Order: append([]int(nil), t.order...),
	}
	s.BatchRNG, _ = t.batchSrc.MarshalBinary() // PCG's MarshalBinary cannot fail
	s.NoiseRNG, _ = t.noiseSrc.MarshalBinary()
	for _, v := range t.vel {
		w := make([]float64, len(v))
		for i, x := range v {
			w[i] = float64(x)
		}
		s.Velocity = append(s.Velocity, w)
	}
	return s
}

// Restore sets the trainer's state, checking that it fits this trainer's
// data, model and settings. The model's parameters are restored
// separately.
func (t *Trainer[T]) Restore(s State) error {
	bad := func(format string, args ...any) error {
		return fmt.Errorf("optim: Restore: "+format+"; the saved state does not belong to this model, data and settings", args...)
	}
	switch {
	case s.Step < 0 || s.Epoch < 0 || s.InEpoch < 0 || s.InEpoch > t.stepsPerEpoch:
		return bad("counters step %d, epoch %d, step in epoch %d (of %d)", s.Step, s.Epoch, s.InEpoch, t.stepsPerEpoch)
	case len(s.Order) != t.set.Rows:
		return bad("batch order has %d rows, the data %d", len(s.Order), t.set.Rows)
	case (s.Velocity == nil) != (t.vel == nil):
		return bad("momentum buffers present: %v, momentum set: %v", s.Velocity != nil, t.vel != nil)
	case s.EpochRows < 0 || math.IsNaN(s.EpochLoss) || math.IsInf(s.EpochLoss, 0):
		return bad("epoch totals %v over %d rows", s.EpochLoss, s.EpochRows)
	}
	seen := make([]bool, t.set.Rows)
	for _, r := range s.Order {
		if r < 0 || r >= t.set.Rows || seen[r] {
			return bad("batch order is not a permutation of the rows")
		}
		seen[r] = true
	}
	if s.Velocity != nil {
		if len(s.Velocity) != len(t.params) {
			return bad("%d momentum buffers for %d parameters", len(s.Velocity), len(t.params))
		}
		for i, v := range s.Velocity {
			if len(v) != len(t.params[i].Value) {
				return bad("momentum buffer %d (%s) has %d values, want %d", i, t.params[i].Name, len(v), len(t.params[i].Value))
			}
		}
	}
	if err := t.batchSrc.UnmarshalBinary(s.BatchRNG); err != nil {
		return bad("batch random stream: %v", err)
	}
	if err := t.noiseSrc.UnmarshalBinary(s.NoiseRNG); err != nil {
		return bad("noise random stream: %v", err)
	}
	t.step, t.epoch, t.inEpoch = s.Step, s.Epoch, s.InEpoch
	t.epochLoss, t.epochRows, t.lastLoss = s.EpochLoss, s.EpochRows, s.LastLoss
	copy(t.order, s.Order)
	for i, v := range s.Velocity {
		for j, x := range v {
			t.vel[i][j] = T(x)
		}
	}
	return nil
}

// Settings returns the settings the trainer runs with, defaults filled in.
func (t *Trainer[T]) Settings() Settings { return t.s }
