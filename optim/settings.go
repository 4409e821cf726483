package optim

import (
	"fmt"
	"math"
)

// Sampling chooses how minibatches are drawn.
type Sampling int

const (
	// Shuffled visits every row once per epoch, in a fresh random order
	// each epoch; the last batch of an epoch may be smaller.
	Shuffled Sampling = iota
	// Independent draws every batch's rows uniformly with replacement,
	// independently at every step (the i.i.d. model of SGD noise). An
	// epoch is ⌈N/B⌉ such steps.
	Independent
)

func (s Sampling) String() string {
	switch s {
	case Shuffled:
		return "shuffled"
	case Independent:
		return "independent"
	}
	return fmt.Sprintf("Sampling(%d)", int(s))
}

// Progress tells a Schedule where the run is.
type Progress struct {
	Step          int // steps taken before this one, from 0
	Epoch         int // the current epoch, from 0
	StepsPerEpoch int
	Steps         int // steps the run will take if it reaches Settings.Epochs
}

// Schedule gives the factor by which the base learning rate is multiplied
// at a step.
type Schedule interface {
	Factor(p Progress) float64
}

// Constant keeps the learning rate fixed. A nil Schedule means Constant.
type Constant struct{}

func (Constant) Factor(Progress) float64 { return 1 }

// StepDecay multiplies the rate by By every Epochs epochs.
type StepDecay struct {
	Epochs int     // zero means 1
	By     float64 // for example 0.1
}

func (s StepDecay) Factor(p Progress) float64 {
	e := max(s.Epochs, 1)
	return math.Pow(s.By, float64(p.Epoch/e))
}

// Cosine anneals the rate from the base value to Floor·base along half a
// cosine over the whole run.
type Cosine struct {
	Floor float64 // fraction of the base rate reached at the end; 0 to 1
}

func (c Cosine) Factor(p Progress) float64 {
	if p.Steps <= 1 {
		return 1
	}
	t := float64(p.Step) / float64(p.Steps-1)
	return c.Floor + (1-c.Floor)*(1+math.Cos(math.Pi*t))/2
}

// Settings configures a training run. The zero value is a sensible start:
// learning rate 0.01, full-batch gradient descent, 10 epochs, no momentum,
// no weight decay, no noise, seed 0.
type Settings struct {
	// LearningRate is the base step size η; zero means 0.01.
	LearningRate float64
	// Schedule scales η over the run; nil keeps it constant.
	Schedule Schedule
	// BatchSize is the number of rows per step. Zero, or at least the
	// number of rows, means full-batch gradient descent: one step per epoch
	// over all rows in their stored order.
	BatchSize int
	// Sampling chooses between shuffled epochs (the zero value) and
	// independent draws with replacement.
	Sampling Sampling
	// Momentum μ in [0, 1): heavy-ball v ← μv + g, θ ← θ − ηv; with
	// Nesterov, θ ← θ − η(g + μv).
	Momentum float64
	Nesterov bool
	// WeightDecay λ adds λ‖θ‖² to the objective for every parameter with
	// Decay set: the weights of a plain network, the scales ρ of a
	// normalized one.
	WeightDecay float64
	// Temperature T ≥ 0 adds Langevin noise: every step adds √(2ηT)·ξ,
	// ξ ~ N(0, I), to every parameter, the Euler–Maruyama step of
	// dθ = −∇L dt + √(2T) dB.
	Temperature float64
	// Epochs is the most epochs the run takes; zero means 10.
	Epochs int
	// TargetLoss, when positive, ends the run after the first epoch whose
	// mean minibatch data loss is at most TargetLoss.
	TargetLoss float64
	// Seed selects the random streams (batch order and noise), which are
	// independent of each other: turning noise on does not change the batch
	// order.
	Seed uint64
	// Hooks, when non-nil, observe the run and may stop it.
	Hooks *Hooks
}

func (s Settings) withDefaults() Settings {
	if s.LearningRate == 0 {
		s.LearningRate = 0.01
	}
	if s.Epochs == 0 {
		s.Epochs = 10
	}
	if s.Schedule == nil {
		s.Schedule = Constant{}
	}
	return s
}

func (s Settings) validate() error {
	bad := func(field string, v any, want string) error {
		return fmt.Errorf("optim: Settings.%s = %v; %s", field, v, want)
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case !(s.LearningRate > 0) || !finite(s.LearningRate):
		return bad("LearningRate", s.LearningRate, "want a positive step size")
	case s.BatchSize < 0:
		return bad("BatchSize", s.BatchSize, "want 0 (full batch) or a positive number of rows")
	case s.Sampling != Shuffled && s.Sampling != Independent:
		return bad("Sampling", s.Sampling, "want Shuffled or Independent")
	case !(s.Momentum >= 0 && s.Momentum < 1):
		return bad("Momentum", s.Momentum, "want 0 ≤ μ < 1")
	case !(s.WeightDecay >= 0) || !finite(s.WeightDecay):
		return bad("WeightDecay", s.WeightDecay, "want λ ≥ 0")
	case !(s.Temperature >= 0) || !finite(s.Temperature):
		return bad("Temperature", s.Temperature, "want T ≥ 0")
	case s.Epochs < 0:
		return bad("Epochs", s.Epochs, "want a positive number of epochs (0 means 10)")
	case s.TargetLoss < 0 || math.IsNaN(s.TargetLoss):
		return bad("TargetLoss", s.TargetLoss, "want 0 (none) or a positive loss")
	}
	return nil
}
