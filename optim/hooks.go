package optim

import (
	"errors"
	"math"
	"time"
)

// ErrStop, returned by a hook, ends the run cleanly: Run returns the result
// with Status Stopped and a nil error. Any other error from a hook ends the
// run and is returned as is.
var ErrStop = errors.New("optim: stopped by a hook")

// Hooks observe a run. Every field is optional; a nil field costs one nil
// check, and the quantities only a hook needs (ρ_k, ν_k, ‖V̇_k‖, margins,
// ρ*) are computed only when the hook that receives them is set.
//
// The info values passed to a hook, and the slices inside them, belong to
// the trainer and are valid only during the call: copy what you keep.
type Hooks struct {
	// Step is called after every step.
	Step func(*StepInfo) error
	// Epoch is called at the end of every epoch.
	Epoch func(*EpochInfo) error
	// FullMarginsEvery, when positive, computes the normalized margins of
	// the whole training set every that many steps and hands them to Step
	// in StepInfo.Full. It costs a forward pass over the training set.
	FullMarginsEvery int
	// EpochMargins computes the whole training set's margins at the end of
	// every epoch, for EpochInfo.Full.
	EpochMargins bool
}

// LossParts splits the objective L = Data + Decay + Multiplier at the
// weights before the step.
type LossParts struct {
	Data       float64 // mean loss over the minibatch
	Decay      float64 // λ Σ ‖θ‖² over the parameters with Decay set
	Multiplier float64 // Σ_k ν_k(‖V_k‖² − 1): zero while every direction is on the sphere
	Total      float64
}

// Margins summarizes normalized margins: for one ±1 output, y·f(x; V); for
// one-hot targets, f_y(x; V) − max_{j≠y} f_j(x; V), where f(x; V) = f(x; W)/ρ
// is the output of the network with every layer scaled to unit norm.
type Margins struct {
	Rows     int
	Mean     float64
	Min      float64
	Negative int // rows with a margin ≤ 0: misclassified (or on the boundary)
}

// StepInfo describes one step. Quantities are taken at the weights before
// the update, except Full, which is computed after it.
//
// The per-layer slices have one entry per dense layer, in order (the
// readout last), whether or not the model normalizes that layer: for layer
// k, ρ_k = ‖W_k‖_F and V_k = W_k/ρ_k, and G_k = ∂L_data/∂W_k. A layer whose
// weights are all zero has no direction: while one does, ρ = 0 and RhoDot,
// RhoStar and the margins are NaN.
type StepInfo struct {
	Step         int // steps taken, counting this one
	Epoch        int // from 0
	LearningRate float64
	Temperature  float64
	Loss         LossParts
	// Rho is the network's scale ρ = ∏ρ_k, LayerRho the ρ_k.
	Rho      float64
	LayerRho []float64
	// DirNorm is ‖V_k‖_F of the model's own directions (exactly 1 for a
	// plain layer; drifts without retraction under the multiplier).
	DirNorm []float64
	// DirSpeed is ‖V̇_k‖_F, the speed of the direction under the
	// weight-normalized gradient flow, ρ_k·‖G_k − ⟨G_k, V_k⟩V_k‖_F. (Plain
	// gradient descent on W moves V_k at 1/ρ_k² of this speed.)
	DirSpeed []float64
	// Nu is the Lagrange multiplier ν_k = −⟨G_k, W_k⟩/2 that holds ‖V_k‖ = 1
	// under the flow. By Euler's theorem for homogeneous functions it is the
	// same for every layer.
	Nu []float64
	// RhoDot is dρ/dt of the network's scale ρ = ∏ρ_k under the gradient
	// flow of the parameters actually trained, with their decay: ρ Σ_k
	// (−E/ρ_k² − 2λ_k) over the layers whose norm is free, E = ⟨G_k, W_k⟩
	// (optim/scales.go derives it for a plain network and for global,
	// per-layer and per-unit scales). With one global scale it is the
	// familiar −E/ρ − 2λρ.
	RhoDot float64
	// RhoStar is the equilibrium scale for the current directions, where
	// dρ/dt = 0 in the mode trained (the function RhoStar): a/(b + λ) with
	// one global scale, the largest root of a − bρ − λρ^{2/L−1} with L
	// layers of free, decayed norm. Defined for the square losses
	// (loss.Equilibrium), NaN for others.
	RhoStar float64
	// Margins summarizes the minibatch's normalized margins.
	Margins Margins
	// Full summarizes the whole training set's margins, after the update,
	// on the steps Hooks.FullMarginsEvery asks for; nil otherwise.
	Full *Margins
}

// EpochInfo describes a finished epoch.
type EpochInfo struct {
	Epoch   int // from 0
	Steps   int // steps taken so far in the run
	Loss    float64
	Rho     float64
	Elapsed time.Duration // since Run started
	// Full summarizes the training set's margins when Hooks.EpochMargins
	// is set; nil otherwise.
	Full *Margins
}

// Margin returns the normalized margin of one output row against its
// target row (see Margins), dividing the output by scale.
func Margin[T float32 | float64](out, target []T, scale float64) float64 {
	if len(out) == 1 {
		return float64(target[0]) * float64(out[0]) / scale
	}
	y := 0
	for j, v := range target {
		if v > target[y] {
			y = j
		}
	}
	other := math.Inf(-1)
	for j, v := range out {
		if j != y && float64(v) > other {
			other = float64(v)
		}
	}
	return (float64(out[y]) - other) / scale
}

// summarize folds the margins of rows output rows into m.
func summarize[T float32 | float64](m *Margins, out, target []T, rows, cols int, scale float64) {
	for r := range rows {
		g := Margin(out[r*cols:(r+1)*cols], target[r*cols:(r+1)*cols], scale)
		if m.Rows == 0 || g < m.Min {
			m.Min = g
		}
		m.Mean += (g - m.Mean) / float64(m.Rows+1)
		m.Rows++
		if g <= 0 {
			m.Negative++
		}
	}
}

// Join returns hooks that call each of hs in turn (nil entries and nil
// fields are skipped); the first error stops the call. The joined hooks
// compute the whole set's margins as often as the most demanding of hs
// asks: the smallest positive FullMarginsEvery, and EpochMargins if any
// sets it.
func Join(hs ...*Hooks) *Hooks {
	j := &Hooks{}
	var steps []func(*StepInfo) error
	var epochs []func(*EpochInfo) error
	for _, h := range hs {
		if h == nil {
			continue
		}
		if h.Step != nil {
			steps = append(steps, h.Step)
		}
		if h.Epoch != nil {
			epochs = append(epochs, h.Epoch)
		}
		if h.FullMarginsEvery > 0 && (j.FullMarginsEvery == 0 || h.FullMarginsEvery < j.FullMarginsEvery) {
			j.FullMarginsEvery = h.FullMarginsEvery
		}
		j.EpochMargins = j.EpochMargins || h.EpochMargins
	}
	if len(steps) > 0 {
		j.Step = func(s *StepInfo) error {
			for _, f := range steps {
				if err := f(s); err != nil {
					return err
				}
			}
			return nil
		}
	}
	if len(epochs) > 0 {
		j.Epoch = func(e *EpochInfo) error {
			for _, f := range epochs {
				if err := f(e); err != nil {
					return err
				}
			}
			return nil
		}
	}
	return j
}
