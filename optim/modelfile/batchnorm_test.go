package modelfile_test

import (
	"bytes"
	"context"
	"errors"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/net/schema"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// The data in this file are invented rows: what is checked (round trips,
// resumed runs, the readers' agreement) holds for any data.

func bnNetwork[T net.Float](t testing.TB, seed uint64) *net.Network[T] {
	n, err := net.NewBuilder[T](5).ConstantFeature("one").
		Dense("h1", 7).BatchNorm("n1", true, false).ReLU("r1").
		Dense("h2", 6).BatchNorm("n2", true, true).ReLU("r2").
		Readout("out", 3).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: seed, Rho0: 1.5}); err != nil {
		t.Fatal(err)
	}
	return n
}

func bnSet[T net.Float](rows int) *data.Set[T] {
	rng := rand.New(rand.NewPCG(4, 4))
	set := &data.Set[T]{Rows: rows, Features: 5, Outputs: 3, X: make([]T, rows*5), Y: make([]T, rows*3)}
	for i := range set.X {
		set.X[i] = T(2 + rng.NormFloat64())
	}
	for r := range rows {
		set.Y[r*3+rng.IntN(3)] = 1
	}
	return set
}

// trained runs a few steps so that the running statistics leave their
// starting values.
func trained[T net.Float](t testing.TB, n *net.Network[T]) *net.Network[T] {
	tr, err := optim.NewTrainer[T](n, loss.Square[T]{}, bnSet[T](40), optim.Settings{LearningRate: 0.05, BatchSize: 8, Momentum: 0.9, Epochs: 2, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	if v := n.Running()[1].Value[0]; v == 1 {
		t.Fatal("test premise: the running variance has not moved")
	}
	return n
}

func sameRunning[T net.Float](t *testing.T, a, b *net.Network[T]) {
	t.Helper()
	ra, rb := a.Running(), b.Running()
	if len(ra) != len(rb) {
		t.Fatalf("%d running statistics, want %d", len(rb), len(ra))
	}
	for i := range ra {
		if ra[i].Name != rb[i].Name || !slices.Equal(ra[i].Value, rb[i].Value) {
			t.Fatalf("running statistic %s: %v, want %s %v", rb[i].Name, rb[i].Value, ra[i].Name, ra[i].Value)
		}
	}
}

// TestBatchNormRoundTrip: a network with batch normalization comes back
// from its model file with the same parameters, running statistics and
// settings, so its inference-mode outputs are the same bits.
func TestBatchNormRoundTrip(t *testing.T) {
	n := trained(t, bnNetwork[float32](t, 1))
	b := encode(t, &modelfile.Model[float32]{Network: n, Classes: []string{"a", "b", "c"}})
	got, err := modelfile.Read[float32](b, "mem")
	if err != nil {
		t.Fatal(err)
	}
	sameRunning(t, n, got.Network)
	for i, p := range n.Params() {
		if !slices.Equal(p.Value, got.Network.Params()[i].Value) {
			t.Fatalf("%s differs after the round trip", p.Name)
		}
	}
	sameOutputs(t, n, got.Network)
	spec, _ := got.Network.Spec()
	if s := spec[2]; s.Kind != schema.KindBatchNorm || !s.Scale || s.Shift || s.Epsilon != 1e-5 {
		t.Errorf("node n1 read back as %+v", s)
	}
	// Widened into float64 exactly.
	wide, err := modelfile.Read[float64](b, "mem")
	if err != nil {
		t.Fatal(err)
	}
	for i, r := range n.Running() {
		for j, v := range r.Value {
			if float64(v) != wide.Network.Running()[i].Value[j] {
				t.Fatalf("%s[%d]: %v widened to %v", r.Name, j, v, wide.Network.Running()[i].Value[j])
			}
		}
	}
	// Weight normalization with batch normalization is refused.
	w, err := normalize.Wrap(n, normalize.Options{})
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := modelfile.Write(&buf, &modelfile.Model[float32]{Network: n, Normalized: w}); err == nil || !strings.Contains(err.Error(), "batch-norm") {
		t.Errorf("a weight-normalized model with batch-norm nodes: %v", err)
	}
}

// TestBatchNormCheckpointResume: a run of a batch-normalized network
// interrupted at step 7, saved to a checkpoint (with the running
// statistics and kept arrays), loaded and resumed ends with the same bits
// — parameters and running statistics — as a run never interrupted.
func TestBatchNormCheckpointResume(t *testing.T) {
	set := bnSet[float32](70)
	s := optim.Settings{LearningRate: 0.05, BatchSize: 16, Momentum: 0.9, Temperature: 1e-6, WeightDecay: 1e-3, Epochs: 4, Seed: 8}
	run := func(n *net.Network[float32], s optim.Settings, st *optim.State) *optim.Trainer[float32] {
		tr, err := optim.NewTrainer[float32](n, loss.Square[float32]{}, set, s)
		if err != nil {
			t.Fatal(err)
		}
		if st != nil {
			if err := tr.Restore(*st); err != nil {
				t.Fatal(err)
			}
		}
		if _, err := tr.Run(context.Background()); err != nil {
			t.Fatal(err)
		}
		return tr
	}
	whole := bnNetwork[float32](t, 5)
	run(whole, s, nil)

	part := bnNetwork[float32](t, 5)
	stop := s
	stop.Hooks = &optim.Hooks{Step: func(i *optim.StepInfo) error {
		if i.Step == 7 {
			return optim.ErrStop
		}
		return nil
	}}
	stopped := run(part, stop, nil).State()
	var kept [][]float64
	for _, p := range part.Params() {
		kept = append(kept, widen(p.Value))
	}
	for _, r := range part.Running() {
		kept = append(kept, widen(r.Value))
	}
	path := filepath.Join(t.TempDir(), "run.checkpoint")
	if err := modelfile.Save(path, &modelfile.Model[float32]{Network: part, Checkpoint: &stopped, Kept: kept}); err != nil {
		t.Fatal(err)
	}
	back, err := modelfile.Load[float32](path)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.EqualFunc(back.Kept, kept, slices.Equal[[]float64]) {
		t.Error("the kept arrays (parameters and running statistics) differ after the round trip")
	}
	sameRunning(t, part, back.Network)
	run(back.Network, s, back.Checkpoint)
	for i, p := range whole.Params() {
		for j, v := range p.Value {
			if math.Float32bits(v) != math.Float32bits(back.Network.Params()[i].Value[j]) {
				t.Fatalf("%s[%d]: resumed %v, uninterrupted %v", p.Name, j, back.Network.Params()[i].Value[j], v)
			}
		}
	}
	sameRunning(t, whole, back.Network)
}

func widen[T net.Float](v []T) []float64 {
	w := make([]float64, len(v))
	for i, x := range v {
		w[i] = float64(x)
	}
	return w
}

// TestBatchNormFilesRefused: both readers refuse, for the same reason,
// files whose batch-norm parts are wrong (docs/model-file.md, "Validation
// on reading").
func TestBatchNormFilesRefused(t *testing.T) {
	n := trained(t, bnNetwork[float64](t, 3))
	good := encode(t, &modelfile.Model[float64]{Network: n})
	h := string(header(good))
	for _, c := range []struct{ name, from, to string }{
		{"scale array without the setting", `"kind":"batch-norm","scale":true`, `"kind":"batch-norm"`},
		{"zero epsilon", `"epsilon":0.00001`, `"epsilon":0`},
		{"no epsilon", `,"epsilon":0.00001`, ``},
		{"epsilon on a dense layer", `"kind":"dense","units":7`, `"kind":"dense","units":7,"epsilon":1`},
		{"running mean as a weight", `"name":"n1.mean","role":"running"`, `"name":"n1.mean","role":"weight"`},
		{"with a normalization", `"graph":`, `"normalization":{"scale":"per-layer","hold":"multiplier"},"graph":`},
	} {
		if !strings.Contains(h, c.from) {
			t.Fatalf("%s: the header has no %s: %s", c.name, c.from, h)
		}
		b := withHeader(good, []byte(strings.Replace(h, c.from, c.to, 1)))
		if _, err := modelfile.Read[float64](b, "f"); err == nil {
			t.Errorf("%s: accepted", c.name)
		}
		agree(t, b)
	}
	// Values: a negative variance and a NaN mean.
	for _, c := range []struct {
		name string
		set  func()
		undo func()
	}{
		{"negative variance", func() { n.Running()[1].Value[2] = -1e-3 }, func() { n.Running()[1].Value[2] = 1 }},
		{"NaN mean", func() { n.Running()[2].Value[0] = math.NaN() }, func() { n.Running()[2].Value[0] = 0 }},
	} {
		c.set()
		b := encode(t, &modelfile.Model[float64]{Network: n})
		c.undo()
		if _, err := modelfile.Read[float64](b, "f"); !errors.Is(err, schema.ErrShape) {
			t.Errorf("%s: %v, want a shape error", c.name, err)
		}
		agree(t, b)
	}
}
