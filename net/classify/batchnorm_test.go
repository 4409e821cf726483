package classify_test

import (
	"context"
	"fmt"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// buildBN makes and briefly trains a network with batch normalization
// after each hidden layer: the trainer runs its steps in training mode
// and leaves the network in inference mode, with running statistics that
// the steps have moved.
func buildBN(t *testing.T, set *data.Set[float64], scale, shift bool) *modelfile.Model[float64] {
	t.Helper()
	b := net.NewBuilder[float64](set.Features).ConstantFeature("one")
	for i, w := range []int{9, 7} {
		id := fmt.Sprint(i + 1)
		b.Dense("hidden"+id, w).BatchNorm("norm"+id, scale, shift).ReLU("relu" + id)
	}
	n, err := b.Readout("readout", set.Outputs).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Rho0: 2, Seed: 7}); err != nil {
		t.Fatal(err)
	}
	tr, err := optim.NewTrainer[float64](n, loss.Square[float64]{}, set, optim.Settings{LearningRate: 0.05, BatchSize: 50, WeightDecay: 1e-3, Epochs: 2, Seed: 3})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	if n.Running()[1].Value[0] == 1 {
		t.Fatal("test premise: the running variance has not moved")
	}
	return &modelfile.Model[float64]{Network: n, Classes: set.Classes}
}

// TestSameBitsBatchNorm: classify serves a batch-normalized model with
// its stored running statistics, bit for bit as the training library's
// inference-mode forward pass computes it (the reference, as in
// identical_test.go), in float64 and, after conversion, in float32, for
// multi-class and ±1 models with and without a learned scale and shift.
// The arithmetic is written once (internal/arith) and has no fused
// multiply-add, so the bits agree on every architecture.
func TestSameBitsBatchNorm(t *testing.T) {
	split := demoSplit(t)
	sets := map[bool]*data.Set[float64]{false: split.Train, true: binarySet(split.Train)}
	x := append(append([]float64(nil), split.Train.X...), split.Test.X...)
	rows := split.Train.Rows + split.Test.Rows
	for _, binary := range []bool{false, true} {
		for _, st := range [][2]bool{{true, false}, {false, false}, {true, true}} {
			t.Run(fmt.Sprintf("binary=%v/scale=%v/shift=%v", binary, st[0], st[1]), func(t *testing.T) {
				m := buildBN(t, sets[binary], st[0], st[1])
				c := saveLoad(t, m)
				sameBits(t, c, x, rows, m.Network.Forward(x, rows))

				m32, c32 := convert32(t, m)
				x32 := make([]float32, len(x))
				for i, v := range x {
					x32[i] = float32(v)
				}
				var want []float64
				for _, v := range m32.Network.Forward(x32, rows) {
					want = append(want, float64(v))
				}
				sameBits(t, c32, x, rows, want)
			})
		}
	}
}
