package optim

import (
	"errors"
	"math"
	"runtime"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
)

// TestUpdatePassGuards checks the one pass that keeps the rollback copy,
// steps, and looks for a bad gradient only where a value went bad
// (Trainer.update) against the rule it must keep: the new values are those of the serial noise-free step
// (stepExact) bit for bit; a non-finite gradient anywhere is reported
// before a non-finite update, with the smallest index of the first
// parameter that has one; and after either error every value and
// velocity holds the bits it had before the step. The network is large
// enough that its weight matrices are shared by the workers of
// internal/kern in chunks, and the bad elements sit in different chunks;
// run with one and two threads.
func TestUpdatePassGuards(t *testing.T) {
	n, err := net.NewBuilder[float32](200).Dense("h1", 256).ReLU("r1").Dense("h2", 256).ReLU("r2").Readout("out", 10).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 3, Rho0: 1}); err != nil {
		t.Fatal(err)
	}
	set := &data.Set[float32]{Rows: 4, Features: 200, Outputs: 10, X: make([]float32, 800), Y: make([]float32, 40)}
	tr, err := NewTrainer(Model[float32](n), loss.Square[float32]{}, set, Settings{Momentum: 0.9, Nesterov: true, WeightDecay: 1e-3})
	if err != nil {
		t.Fatal(err)
	}
	if len(tr.params[0].Value) < 1<<15 || len(tr.params[1].Value) < 1<<15 {
		t.Fatalf("parameters of %d and %d elements: too small to be shared by the workers", len(tr.params[0].Value), len(tr.params[1].Value))
	}
	const lr = 0.05
	fill := func() {
		for i, p := range tr.params {
			for j := range p.Grad {
				p.Grad[j] = float32(math.Sin(float64(7*j + i)))
				tr.vel[i][j] = float32(math.Cos(float64(3*j+i))) / 10
			}
		}
	}
	snapshot := func() (vals, vels [][]float32) {
		for i, p := range tr.params {
			vals = append(vals, append([]float32(nil), p.Value...))
			vels = append(vels, append([]float32(nil), tr.vel[i]...))
		}
		return vals, vels
	}
	unchanged := func(t *testing.T, vals, vels [][]float32) {
		t.Helper()
		for i, p := range tr.params {
			for j := range p.Value {
				if math.Float32bits(p.Value[j]) != math.Float32bits(vals[i][j]) || math.Float32bits(tr.vel[i][j]) != math.Float32bits(vels[i][j]) {
					t.Fatalf("%s[%d]: value %v velocity %v after the refused step, were %v and %v", p.Name, j, p.Value[j], tr.vel[i][j], vals[i][j], vels[i][j])
				}
			}
		}
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2} {
		runtime.GOMAXPROCS(procs)
		fill()
		vals, vels := snapshot()
		for i, p := range tr.params {
			d := 0.0
			if p.Decay {
				d = 2 * tr.s.WeightDecay
			}
			stepExact(vals[i], p.Grad, vels[i], lr, d, tr.s.Momentum, true)
		}
		if err := tr.update(lr); err != nil {
			t.Fatal(err)
		}
		unchanged(t, vals, vels) // here: equal to the serial step's bits

		// An overflowing update in h1 and, later in the order, two bad
		// gradients in h2 (in different chunks): the gradient wins.
		fill()
		vals, vels = snapshot()
		tr.params[0].Grad[100] = 3e38
		tr.params[1].Grad[50000] = float32(math.Inf(1))
		tr.params[1].Grad[40000] = float32(math.NaN())
		var nf *NonFiniteError
		if err := tr.update(1e3); !errors.As(err, &nf) || nf.What != "gradient of "+tr.params[1].Name || nf.Index != 40000 {
			t.Fatalf("GOMAXPROCS %d: %v, want the gradient of %s at 40000", procs, err, tr.params[1].Name)
		}
		unchanged(t, vals, vels)

		// The overflowing update alone.
		tr.params[1].Grad[50000], tr.params[1].Grad[40000] = 1, 1
		vals, vels = snapshot()
		if err := tr.update(1e3); !errors.As(err, &nf) || nf.What != "update of "+tr.params[0].Name || nf.Index != 100 {
			t.Fatalf("GOMAXPROCS %d: %v, want the update of %s at 100", procs, err, tr.params[0].Name)
		}
		unchanged(t, vals, vels)

		// A step size of 0 still turns an infinite gradient into a
		// non-finite value (0·∞ = NaN), so it is found.
		tr.params[0].Grad[100] = 1
		tr.params[2].Grad[3] = float32(math.Inf(-1))
		if err := tr.update(0); !errors.As(err, &nf) || nf.What != "gradient of "+tr.params[2].Name || nf.Index != 3 {
			t.Fatalf("GOMAXPROCS %d: %v, want the gradient of %s at 3", procs, err, tr.params[2].Name)
		}
		unchanged(t, vals, vels)
	}
}
