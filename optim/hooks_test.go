package optim_test

import (
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// TestHookValuesAgainstFormulas checks what the Step hook reports on a fixed
// small network against the weight-normalized square-loss dynamics written
// out per example (REFERENCES.md, derived there from the loss by calculus),
// in rhomb's scaling L = (1/B)Σ_n (y_n − ρf_n)² + λρ², and against the
// wrapper's own autodiff gradients:
//
//	ρ̇   = (2/B) Σ (y − ρf) f − 2λρ              = −(∂L/∂ρ)
//	ν_k = (ρ/B) Σ (y − ρf) f                    (the same for every k)
//	V̇_k = (2ρ/B) Σ (y − ρf)(∂f/∂V_k − f V_k)    = −(projected ∂L/∂V_k)
//	ρ*  = Σ y f / (Σ f² + λB)
//
// where f = f(x; V) is the output of the network with unit-norm layers.
func TestHookValuesAgainstFormulas(t *testing.T) {
	set := irisBinary(t)
	const lambda = 0.03
	n := mlp(t, []int{4, 6, 5, 1}, 7, 1.5)
	w, err := normalize.Wrap(n, normalize.Options{Scale: normalize.Global})
	if err != nil {
		t.Fatal(err)
	}
	// The reference network holds the unit directions V_k as its weights.
	ref := mlp(t, []int{4, 6, 5, 1}, 7, 1.5)
	rho := w.Params()[0].Value[0]
	for k, d := range ref.Dense() {
		v := w.Params()[k+1].Value
		copy(d.W.Value, v)
	}
	B := set.Rows
	var sumYF, sumFF, sumRF float64 // Σyf, Σf², Σ(y−ρf)f
	L := len(ref.Dense())
	vdot := make([][]float64, L)
	for k, d := range ref.Dense() {
		vdot[k] = make([]float64, len(d.W.Value))
	}
	for r := range B {
		f := ref.Forward(set.X[r*4:(r+1)*4], 1)[0]
		y := set.Y[r]
		sumYF += y * f
		sumFF += f * f
		sumRF += (y - rho*f) * f
		ref.Backward([]float64{1}) // W.Grad = ∂f/∂V_k
		for k, d := range ref.Dense() {
			for j, g := range d.W.Grad {
				vdot[k][j] += 2 * rho / float64(B) * (y - rho*f) * (g - f*d.W.Value[j])
			}
		}
	}
	wantRhoDot := 2/float64(B)*sumRF - 2*lambda*rho
	wantNu := rho / float64(B) * sumRF
	wantRhoStar := sumYF / (sumFF + lambda*float64(B))

	var got optim.StepInfo
	var gradRho float64
	var gradV [][]float64
	hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
		got = *s
		got.DirSpeed = append([]float64(nil), s.DirSpeed...)
		got.Nu = append([]float64(nil), s.Nu...)
		gradRho = w.Params()[0].Grad[0]
		for _, p := range w.Params()[1:] {
			gradV = append(gradV, append([]float64(nil), p.Grad...))
		}
		return optim.ErrStop
	}}
	runToFirstHook(t, w, set, lambda, hooks)

	close := hookClose(t)
	close("ρ̇", got.RhoDot, wantRhoDot, math.Abs(wantRhoDot)+lambda*rho)
	close("ρ̇ from autodiff", got.RhoDot, -(gradRho + 2*lambda*rho), math.Abs(wantRhoDot)+lambda*rho)
	close("ρ*", got.RhoStar, wantRhoStar, wantRhoStar)
	close("ρ", got.Rho, rho, rho)
	for k := range L {
		close("ν_"+n.Dense()[k].Name(), got.Nu[k], wantNu, math.Abs(wantNu))
		close("‖V̇‖ of "+n.Dense()[k].Name(), got.DirSpeed[k], net.FrobeniusNorm(vdot[k]), net.FrobeniusNorm(vdot[k]))
		// The wrapper's direction gradient is −V̇ entry by entry.
		for j := range vdot[k] {
			if d := math.Abs(gradV[k][j] + vdot[k][j]); d > hookTol*net.FrobeniusNorm(vdot[k]) {
				t.Errorf("layer %d entry %d: projected gradient %v, −V̇ %v", k, j, gradV[k][j], -vdot[k][j])
				break
			}
		}
	}
	// λρ² is two roundings here, (λρ)ρ, and two in the trainer, λ(Σρ_k²)
	// with one term: each within a factor (1 ± ε)² of the exact value, so
	// they differ by at most about 4ε relative (ε = 2⁻⁵³).
	if want := lambda * rho * rho; math.Abs(got.Loss.Decay-want) > 4*0x1p-53*want {
		t.Errorf("decay term %v, want λρ² = %v", got.Loss.Decay, want)
	}
	if got.Loss.Multiplier != 0 {
		t.Errorf("multiplier term %v with every ‖V‖ = 1, want 0", got.Loss.Multiplier)
	}
}

// TestRhoSettlesAtEquilibrium checks the dynamics claim of the square-loss
// theory (REFERENCES.md; common practice): from a small ρ0, on linearly
// separable data (Iris setosa against the rest) with a positive mean
// margin, ρ rises monotonically to the equilibrium ρ* and settles there,
// |ρ − ρ*|/ρ* < 1e-3.
//
// "Rises to" is read precisely: ρ* moves too, because the directions keep
// learning, so ρ increases at every step until it first meets ρ*; from then
// on it tracks ρ* (ρ̇ = 2(mean f² + λ)(ρ* − ρ) pulls it back from either
// side) and the gap closes.
//
// The claim is one global scale's: with several free layers (per layer,
// per unit, plain) a small ρ0 with weight decay can instead shrink towards
// 0 (optim/scales.go: below the smaller root the scales collapse), so
// "rises monotonically" is not claimed there; TestEquilibriumEveryMode and
// gauge's TestEquilibriumReachedInTraining check the settling itself in
// every mode.
func TestRhoSettlesAtEquilibrium(t *testing.T) {
	set := irisBinary(t)
	const rho0, lambda = 0.01, 0.05
	// The claim needs a positive mean margin at the start: take the first
	// seed whose initial network has one.
	var w *normalize.Net[float64]
	for seed := uint64(1); ; seed++ {
		n := mlp(t, []int{4, 8, 1}, seed, rho0)
		out := n.Forward(set.X, set.Rows)
		m := 0.0
		for r := range set.Rows {
			m += set.Y[r] * out[r]
		}
		if m > 0 {
			var err error
			if w, err = normalize.Wrap(n, normalize.Options{Scale: normalize.Global}); err != nil {
				t.Fatal(err)
			}
			break
		}
	}
	var rhos, stars []float64
	hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
		rhos = append(rhos, s.Rho)
		stars = append(stars, s.RhoStar)
		return nil
	}}
	tr, err := optim.NewTrainer[float64](w, loss.Square[float64]{}, set, optim.Settings{
		LearningRate: 0.1, WeightDecay: lambda, Epochs: 1500, Hooks: hooks,
	})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	met := -1
	for i := range rhos {
		if rhos[i] >= stars[i] {
			met = i
			break
		}
		if i > 0 && rhos[i] <= rhos[i-1] {
			t.Fatalf("ρ = %v < ρ* = %v, yet ρ did not rise at step %d (from %v)", rhos[i], stars[i], i+1, rhos[i-1])
		}
	}
	if met < 0 {
		t.Fatalf("ρ never reached ρ* in %d steps (ρ = %v, ρ* = %v)", len(rhos), rhos[len(rhos)-1], stars[len(stars)-1])
	}
	if rhos[met] < 10*rho0 {
		t.Errorf("ρ rose only from %v to %v", rho0, rhos[met])
	}
	last := len(rhos) - 1
	if e := math.Abs(rhos[last]-stars[last]) / stars[last]; !(e < 1e-3) {
		t.Errorf("after %d steps ρ = %v, ρ* = %v: relative gap %.3g, want < 1e-3", last+1, rhos[last], stars[last], e)
	}
}

// TestHookValuesPerLayer is TestHookValuesAgainstFormulas under the
// default per-layer scales, W_k = ρ_k·V_k, with ρ = ∏ρ_k: the multipliers
// and direction speeds keep the same closed forms in ρ (by Euler's
// identity ⟨∂f/∂V_k, V_k⟩ = f every layer sees the same ⟨G_k, W_k⟩, and
// ∂L/∂V_k = ρ_k·G_k = the global form with ρ in place of ρ_k·∏_{j≠k}ρ_j):
//
//	ν_k = (ρ/B) Σ (y − ρf) f,   V̇_k = (2ρ/B) Σ (y − ρf)(∂f/∂V_k − f V_k)
//
// and ρ is the product of the layers' scales; ρ̇ and ρ* of this mode are
// checked in scales_test.go (TestRhoRateEveryMode).
func TestHookValuesPerLayer(t *testing.T) {
	set := irisBinary(t)
	const lambda = 0.03
	n := mlp(t, []int{4, 6, 5, 1}, 7, 1.5)
	w, err := normalize.Wrap(n, normalize.Options{Scale: normalize.PerLayer})
	if err != nil {
		t.Fatal(err)
	}
	var scales, dirs []*net.Param[float64]
	for _, p := range w.Params() {
		if len(p.Value) == 1 {
			scales = append(scales, p)
		} else {
			dirs = append(dirs, p)
		}
	}
	ref := mlp(t, []int{4, 6, 5, 1}, 7, 1.5)
	if len(scales) != len(ref.Dense()) || len(dirs) != len(ref.Dense()) {
		t.Fatalf("%d scales and %d directions for %d layers", len(scales), len(dirs), len(ref.Dense()))
	}
	rho := 1.0
	for k, d := range ref.Dense() {
		rho *= scales[k].Value[0]
		copy(d.W.Value, dirs[k].Value)
	}
	B := set.Rows
	var sumRF float64
	L := len(ref.Dense())
	vdot := make([][]float64, L)
	for k, d := range ref.Dense() {
		vdot[k] = make([]float64, len(d.W.Value))
	}
	for r := range B {
		f := ref.Forward(set.X[r*4:(r+1)*4], 1)[0]
		y := set.Y[r]
		sumRF += (y - rho*f) * f
		ref.Backward([]float64{1})
		for k, d := range ref.Dense() {
			for j, g := range d.W.Grad {
				vdot[k][j] += 2 * rho / float64(B) * (y - rho*f) * (g - f*d.W.Value[j])
			}
		}
	}
	wantNu := rho / float64(B) * sumRF

	var got optim.StepInfo
	var gradV [][]float64
	hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
		got = *s
		got.DirSpeed = append([]float64(nil), s.DirSpeed...)
		got.Nu = append([]float64(nil), s.Nu...)
		for _, p := range dirs {
			gradV = append(gradV, append([]float64(nil), p.Grad...))
		}
		return optim.ErrStop
	}}
	runToFirstHook(t, w, set, lambda, hooks)
	close := hookClose(t)
	close("ρ = ∏ρ_k", got.Rho, rho, rho)
	if len(got.Nu) != L || len(got.DirSpeed) != L {
		t.Fatalf("%d multipliers and %d speeds for %d layers", len(got.Nu), len(got.DirSpeed), L)
	}
	for k := range L {
		close("ν_"+n.Dense()[k].Name(), got.Nu[k], wantNu, math.Abs(wantNu))
		close("‖V̇‖ of "+n.Dense()[k].Name(), got.DirSpeed[k], net.FrobeniusNorm(vdot[k]), net.FrobeniusNorm(vdot[k]))
		for j := range vdot[k] {
			if d := math.Abs(gradV[k][j] + vdot[k][j]); d > hookTol*net.FrobeniusNorm(vdot[k]) {
				t.Errorf("layer %d entry %d: projected gradient %v, −V̇ %v", k, j, gradV[k][j], -vdot[k][j])
				break
			}
		}
	}
}

// runToFirstHook trains w on set with learning rate 0.01 and decay lambda
// until hooks stops the run (at the first step).
func runToFirstHook(t *testing.T, w optim.Model[float64], set *data.Set[float64], lambda float64, hooks *optim.Hooks) {
	t.Helper()
	tr, err := optim.NewTrainer[float64](w, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.01, WeightDecay: lambda, Hooks: hooks})
	if err != nil {
		t.Fatal(err)
	}
	if res, err := tr.Run(context.Background()); err != nil || res.Status != optim.Stopped {
		t.Fatalf("Run: %v, %v", res, err)
	}
}

// hookTol bounds the hook's values against the ones computed in the
// tests: sums of 150 float64 terms computed in two different orders agree
// to about 150ε relative; 1e-11 allows for cancellation in Σ(y − ρf)f.
const hookTol = 1e-11

// hookClose compares a hook's value with the one computed in the test,
// to hookTol relative to scale.
func hookClose(t *testing.T) func(what string, got, want, scale float64) {
	return func(what string, got, want, scale float64) {
		t.Helper()
		if math.Abs(got-want) > hookTol*scale {
			t.Errorf("%s = %.15g, want %.15g", what, got, want)
		}
	}
}
