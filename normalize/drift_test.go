package normalize_test

import (
	"context"
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// TestMultiplierDrift states the tolerance for the multiplier without
// retraction. Each step moves V along a tangent vector g ⟂ V, so by
// Pythagoras ‖V − ηg‖² = ‖V‖² + η²‖g‖² exactly: after S steps without
// noise or momentum, ‖V_S‖² − 1 = η² Σ_s ‖g_s‖², second order in η. The
// test checks that identity (to round-off: each step's ‖V‖² carries a few ε
// of error, so 1e-13 over 200 steps) and that the hooks report the drifted
// norm, and with retraction that no drift remains.
func TestMultiplierDrift(t *testing.T) {
	const rows, eta, steps = 8, 0.05, 200
	x, y := batch(9, rows)
	set := &data.Set[float64]{X: x, Y: y, Rows: rows, Features: 5, Outputs: 3}
	for _, retract := range []bool{false, true} {
		w, err := normalize.Wrap(network(t, 2), normalize.Options{NoRetraction: !retract})
		if err != nil {
			t.Fatal(err)
		}
		dirs := []int{1, 3, 5} // h1.V, h2.V, out.V among rho, V, rho, V, rho, V
		sum := make([]float64, len(dirs))
		var reported []float64
		hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
			for i, d := range dirs {
				for _, g := range w.Params()[d].Grad {
					sum[i] += eta * eta * g * g
				}
			}
			reported = append(reported[:0], s.DirNorm...)
			return nil
		}}
		tr, err := optim.NewTrainer[float64](w, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, Epochs: steps, Hooks: hooks})
		if err != nil {
			t.Fatal(err)
		}
		if _, err := tr.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		norms := w.DirectionNorms(nil)
		for i, d := range dirs {
			drift := norms[i]*norms[i] - 1
			if retract {
				if math.Abs(drift) > 1e-15*steps {
					t.Errorf("retracted %s: ‖V‖² − 1 = %.3g", w.Params()[d].Name, drift)
				}
				continue
			}
			if sum[i] < 1e-6 {
				t.Fatalf("%s: predicted drift %.3g is too small to test", w.Params()[d].Name, sum[i])
			}
			if math.Abs(drift-sum[i]) > 1e-13 {
				t.Errorf("%s: ‖V‖² − 1 = %.15g, η²Σ‖g‖² = %.15g", w.Params()[d].Name, drift, sum[i])
			}
		}
		// The hook saw the norms before the last step; they differ from the
		// final ones by that step's η²‖g‖² at most.
		for i := range dirs {
			if retract {
				continue
			}
			if reported[i] <= 1 || reported[i] > norms[i] {
				t.Errorf("layer %d: hook reported ‖V‖ = %v, final %v", i, reported[i], norms[i])
			}
		}
	}
}
