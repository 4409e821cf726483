package gauge

import (
	"math"

	"github.com/rhomb/rhomb/optim"
)

// EquilibriumOptions sets the criterion of Equilibrium. The zero value
// means GapTol 0.05, SpeedTol 0.05, Window 50.
type EquilibriumOptions struct {
	// GapTol bounds the relative gap |ρ − ρ*|/ρ* at every step of the
	// window; zero means 0.05.
	GapTol float64
	// SpeedTol bounds the direction speed ‖V̇‖ relative to its peak so far
	// in the run; zero means 0.05.
	SpeedTol float64
	// Window is the number of consecutive observed steps over which both
	// bounds must hold; zero means 50.
	Window int
	// Stop, when set, makes Hook return optim.ErrStop once equilibrium is
	// reached, ending the run cleanly.
	Stop bool
}

func (o EquilibriumOptions) withDefaults() EquilibriumOptions {
	if o.GapTol == 0 {
		o.GapTol = 0.05
	}
	if o.SpeedTol == 0 {
		o.SpeedTol = 0.05
	}
	if o.Window == 0 {
		o.Window = 50
	}
	return o
}

// Equilibrium decides when a run has reached the equilibrium of the
// weight-normalized dynamics, from the optim.StepInfo values it is shown.
//
// At an equilibrium of the flow both parts of W = ρ·V are at rest: ρ̇ = 0,
// which for the square loss means ρ = ρ*(V), and V̇_k = 0 for every layer.
// A discrete, noisy run never has either exactly, so the criterion asks
// that, for Window consecutive observed steps,
//
//	|ρ − ρ*| / ρ* ≤ GapTol   and   ‖V̇‖ ≤ SpeedTol · max_{s ≤ t} ‖V̇(s)‖,
//
// with ‖V̇‖ = √Σ_k ‖V̇_k‖² the speed of all directions together.
//
// Why these choices: the gap is relative because ρ* has the units of the
// targets over the normalized outputs, which differ between data sets; it
// is the distance of ρ from the fixed point of its own equation, the quantity
// that ρ̇ = 0 is about. The speed has no natural unit (it scales with ρ,
// the data and the loss), so it is measured against the largest speed of
// the same run: the run has settled when its directions move at a small
// fraction of the pace they once had. A single step can satisfy both bounds
// by chance — the minibatch ρ* and V̇ are noisy — so both must hold for a
// whole window; a step that breaks either starts the count again. The
// defaults (5% and 50 steps) are a convention of this package, not taken
// from a source: 5% is well below the gaps of the transient of a run from
// small ρ0 and above the steady minibatch noise of the demo, and 50 steps
// span a few epochs of a small data set. The criterion is meant for the
// speed of the whole-set gradient: the trainer reports the minibatch's,
// which carries the sampling noise of SGD and does not vanish at
// equilibrium (on the demo data, batch 32, it is still near 18% of its
// peak after 30 epochs while the gap stays below 5% on most steps), and
// Langevin noise adds more. For minibatch or noisy runs raise SpeedTol to
// the noise's level; full-batch runs meet the defaults (see the tests).
//
// For a loss without ρ* (cross-entropy: StepInfo.RhoStar is NaN) and
// while ρ* ≤ 0 (the average normalized margin is negative), the gap is
// undefined and the run is never declared at equilibrium.
type Equilibrium struct {
	o       EquilibriumOptions
	peak    float64
	run     int // consecutive steps meeting both bounds
	reached int // the step at which the criterion first held; 0 before
	last    EquilibriumState
}

// EquilibriumState is what Equilibrium saw at one step.
type EquilibriumState struct {
	Step    int
	Gap     float64 // |ρ − ρ*|/ρ*; NaN when ρ* is NaN or ≤ 0
	Speed   float64 // ‖V̇‖ = √Σ_k ‖V̇_k‖²
	Peak    float64 // the largest Speed so far
	Run     int     // consecutive steps meeting both bounds, this one included
	Reached bool    // the criterion holds now (Run ≥ Window)
}

// NewEquilibrium returns a detector with the given criterion.
func NewEquilibrium(o EquilibriumOptions) *Equilibrium {
	return &Equilibrium{o: o.withDefaults()}
}

// Options returns the criterion in force, defaults filled in.
func (e *Equilibrium) Options() EquilibriumOptions { return e.o }

// relGap returns |ρ − ρ*|/ρ*, or NaN when ρ* is not a positive number.
func relGap(rho, rhoStar float64) float64 {
	if !(rhoStar > 0) || math.IsInf(rhoStar, 0) {
		return math.NaN()
	}
	return math.Abs(rho-rhoStar) / rhoStar
}

// Speed returns √Σ_k s_k², the speed of all directions together from the
// per-layer speeds ‖V̇_k‖ of optim.StepInfo.DirSpeed.
func Speed(dirSpeed []float64) float64 {
	var s float64
	for _, v := range dirSpeed {
		s += v * v
	}
	return math.Sqrt(s)
}

// Observe takes one step's info and returns the state after it. It keeps
// nothing of s.
func (e *Equilibrium) Observe(s *optim.StepInfo) EquilibriumState {
	gap := relGap(s.Rho, s.RhoStar)
	speed := Speed(s.DirSpeed)
	if speed > e.peak {
		e.peak = speed
	}
	if gap <= e.o.GapTol && speed <= e.o.SpeedTol*e.peak {
		e.run++
	} else {
		e.run = 0 // NaN gaps land here too
	}
	ok := e.run >= e.o.Window
	if ok && e.reached == 0 {
		e.reached = s.Step
	}
	e.last = EquilibriumState{Step: s.Step, Gap: gap, Speed: speed, Peak: e.peak, Run: e.run, Reached: ok}
	return e.last
}

// Reached returns the step at which the criterion first held, or 0 if it
// has not yet.
func (e *Equilibrium) Reached() int { return e.reached }

// Last returns the state after the latest Observe.
func (e *Equilibrium) Last() EquilibriumState { return e.last }

// Hook returns a Step hook that observes every step and, with Stop set,
// ends the run with optim.ErrStop when equilibrium is reached.
func (e *Equilibrium) Hook() func(*optim.StepInfo) error {
	return func(s *optim.StepInfo) error {
		if e.Observe(s).Reached && e.o.Stop {
			return optim.ErrStop
		}
		return nil
	}
}
