package optim

import (
	"math"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
)

// TestStepAllocatesNothing proves the training step is allocation-free
// after warm-up (STYLE.md point 3), for a plain, a weight-normalized and a
// batch-normalized network,
// with momentum, noise and both samplings, and with the Step hook's
// diagnostics computed.
func TestStepAllocatesNothing(t *testing.T) {
	for _, shape := range [][]int{{16, 32, 32, 4}, {200, 256, 256, 10}} {
		n, err := net.NewBuilder[float32](shape[0]).Dense("h1", shape[1]).ReLU("r1").Dense("h2", shape[2]).ReLU("r2").Readout("out", shape[3]).Build()
		if err != nil {
			t.Fatal(err)
		}
		if err := n.Init(net.InitSettings{Seed: 1, Rho0: 1}); err != nil {
			t.Fatal(err)
		}
		w, err := normalize.Wrap(n, normalize.Options{})
		if err != nil {
			t.Fatal(err)
		}
		rows := 1024
		set := &data.Set[float32]{Rows: rows, Features: shape[0], Outputs: shape[3], X: make([]float32, rows*shape[0]), Y: make([]float32, rows*shape[3])}
		for i := range set.X {
			set.X[i] = float32(i%7) / 7
		}
		for r := range rows {
			set.Y[r*shape[3]+r%shape[3]] = 1
		}
		bn, err := net.NewBuilder[float32](shape[0]).Dense("h1", shape[1]).BatchNorm("b1", true, false).ReLU("r1").Dense("h2", shape[2]).BatchNorm("b2", true, false).ReLU("r2").Readout("out", shape[3]).Build()
		if err != nil {
			t.Fatal(err)
		}
		if err := bn.Init(net.InitSettings{Seed: 1, Rho0: 1}); err != nil {
			t.Fatal(err)
		}
		for _, m := range []Model[float32]{n, w, bn} {
			for _, s := range []Settings{
				{BatchSize: 128, Momentum: 0.9, Temperature: 1e-6, WeightDecay: 1e-4, Epochs: 1000},
				{BatchSize: 64, Sampling: Independent, Epochs: 1000, Hooks: &Hooks{Step: func(*StepInfo) error { return nil }}},
			} {
				tr, err := NewTrainer(m, loss.Square[float32]{}, set, s)
				if err != nil {
					t.Fatal(err)
				}
				if err := tr.takeStep(); err != nil {
					t.Fatal(err)
				}
				if a := testing.AllocsPerRun(4, func() {
					if err := tr.takeStep(); err != nil {
						t.Fatal(err)
					}
				}); a != 0 {
					t.Errorf("%v, %T, %+v: %v allocations per step, want 0", shape, m, s, a)
				}
			}
		}
	}
}

// TestNotFinite: x − x is 0 exactly for finite x (IEEE 754: x − x = +0 for
// finite x, NaN for ±Inf and NaN; common practice, no source).
func TestNotFinite(t *testing.T) {
	for _, x := range []float64{0, math.Copysign(0, -1), 1, -3.5, math.MaxFloat64, -math.MaxFloat64, math.SmallestNonzeroFloat64} {
		if notFinite(x) || notFinite(float32(x)) && !math.IsInf(float64(float32(x)), 0) {
			t.Errorf("%v reported not finite", x)
		}
	}
	for _, x := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		if !notFinite(x) || !notFinite(float32(x)) {
			t.Errorf("%v reported finite", x)
		}
	}
}
