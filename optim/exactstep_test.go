package optim_test

import (
	"math"
	"math/rand/v2"
	"runtime"
	"testing"

	"github.com/rhomb/rhomb/optim"
)

// TestExactStepParallel: on a parameter large enough to be split over the
// workers, ExactStep gives the same bits at GOMAXPROCS 2 as at 1 (where it
// is one serial loop), for the plain, heavy-ball and Nesterov rules, and
// reports the smallest non-finite index (NaN gradients planted in two
// chunks) either way; and it matches the rule written out here for one
// element (g = grad + d·θ; v = μv + g; θ −= lr·v).
func TestExactStepParallel(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	const n = 300_000 // above the parallel threshold, several chunks
	rng := rand.New(rand.NewPCG(3, 9))
	val0, grad, vel0 := make([]float32, n), make([]float32, n), make([]float32, n)
	for i := range n {
		val0[i], grad[i], vel0[i] = float32(rng.NormFloat64()), float32(rng.NormFloat64()), float32(rng.NormFloat64()/10)
	}
	grad[250_001], grad[9_000] = float32(math.NaN()), float32(math.NaN())
	for _, c := range []struct {
		momentum, nesterov bool
	}{{false, false}, {true, false}, {true, true}} {
		var results [2][]float32
		var bads [2]int
		for k, procs := range []int{1, 2} {
			runtime.GOMAXPROCS(procs)
			val := append([]float32(nil), val0...)
			var vel []float32
			if c.momentum {
				vel = append([]float32(nil), vel0...)
			}
			var s optim.ExactStep[float32]
			bads[k] = s.Apply(val, grad, vel, 0.05, 2e-4, 0.9, c.nesterov)
			results[k] = val
		}
		if bads[0] != 9_000 || bads[1] != 9_000 {
			t.Errorf("%+v: bad index %v at GOMAXPROCS 1 and 2, want 9000 (the smaller planted NaN)", c, bads)
		}
		for i := range results[0] {
			if math.Float32bits(results[0][i]) != math.Float32bits(results[1][i]) {
				t.Fatalf("%+v: element %d differs between GOMAXPROCS 1 and 2", c, i)
			}
		}
		if c.momentum && !c.nesterov {
			// Element 0 by the rule, in float64, rounded to float32 once.
			th, g, v := float64(val0[0]), float64(grad[0]), float64(vel0[0])
			g += 2e-4 * th
			v = 0.9*float64(float32(v)) + g
			want := float32(th - 0.05*v)
			if results[0][0] != want {
				t.Errorf("element 0: %v, the rule gives %v", results[0][0], want)
			}
		}
	}
}
