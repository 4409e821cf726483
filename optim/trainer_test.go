package optim_test

import (
	"bufio"
	"bytes"
	"context"
	"encoding/json"
	"errors"
	"math"
	"runtime"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

func train(t testing.TB, m optim.Model[float64], set *data.Set[float64], s optim.Settings) optim.Result {
	t.Helper()
	tr, err := optim.NewTrainer[float64](m, loss.Square[float64]{}, set, s)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestSameSeedSameBits: the same seed gives identical weights, also when
// GOMAXPROCS changes (products large enough for the kernel's parallel
// path: 128×256×256), with noise, momentum and shuffling on.
func TestSameSeedSameBits(t *testing.T) {
	set := randomSet(1, 512, 64, 10)
	s := optim.Settings{LearningRate: 0.02, BatchSize: 128, Momentum: 0.9, WeightDecay: 1e-4, Temperature: 1e-6, Epochs: 2, Seed: 9}
	run := func(procs int, seed uint64) [][]float64 {
		defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(procs))
		w, err := normalize.Wrap(mlp(t, []int{64, 256, 256, 10}, 3, 1), normalize.Options{})
		if err != nil {
			t.Fatal(err)
		}
		s.Seed = seed
		train(t, w, set, s)
		return weights(w.Params())
	}
	a, b, c := run(2, 9), run(1, 9), run(2, 9)
	if !sameBits(a, b) {
		t.Error("GOMAXPROCS 2 and 1 gave different weights")
	}
	if !sameBits(a, c) {
		t.Error("two runs with the same seed gave different weights")
	}
	if sameBits(a, run(2, 10)) {
		t.Error("a different seed gave the same weights")
	}
}

// TestCancelAndResume: canceling stops at a step boundary with the weights
// of the last whole step, and calling Run again continues to the same bits
// as an uninterrupted run.
func TestCancelAndResume(t *testing.T) {
	set := randomSet(2, 96, 6, 3)
	s := optim.Settings{LearningRate: 0.05, BatchSize: 16, Momentum: 0.5, Temperature: 1e-5, Epochs: 4, Seed: 3}
	whole := mlp(t, []int{6, 12, 3}, 1, 1)
	train(t, whole, set, s)

	part := mlp(t, []int{6, 12, 3}, 1, 1)
	ctx, cancel := context.WithCancel(context.Background())
	s.Hooks = &optim.Hooks{Step: func(i *optim.StepInfo) error {
		if i.Step == 9 { // mid-epoch: 6 steps per epoch
			cancel()
		}
		return nil
	}}
	tr, err := optim.NewTrainer[float64](part, loss.Square[float64]{}, set, s)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(ctx)
	if !errors.Is(err, context.Canceled) || res.Status != optim.Canceled || res.Steps != 9 || res.Epochs != 1 {
		t.Fatalf("canceled run: %+v, %v; want Canceled after 9 steps and 1 epoch", res, err)
	}
	res, err = tr.Run(context.Background())
	if err != nil || res.Status != optim.Finished || res.Steps != 24 {
		t.Fatalf("resumed run: %+v, %v", res, err)
	}
	if !sameBits(weights(whole.Params()), weights(part.Params())) {
		t.Error("canceled and resumed run differs from an uninterrupted one")
	}
}

func TestHookStopsTheRun(t *testing.T) {
	set := randomSet(3, 40, 3, 2)
	res := train(t, mlp(t, []int{3, 4, 2}, 1, 1), set, optim.Settings{BatchSize: 10, Epochs: 5, Hooks: &optim.Hooks{
		Epoch: func(e *optim.EpochInfo) error {
			if e.Epoch == 1 {
				return optim.ErrStop
			}
			return nil
		},
	}})
	if res.Status != optim.Stopped || res.Epochs != 2 || res.Steps != 8 {
		t.Errorf("%+v, want Stopped after 2 epochs, 8 steps", res)
	}
	boom := errors.New("disk full")
	tr, _ := optim.NewTrainer[float64](mlp(t, []int{3, 4, 2}, 1, 1), loss.Square[float64]{}, set, optim.Settings{Hooks: &optim.Hooks{
		Step: func(*optim.StepInfo) error { return boom },
	}})
	if res, err := tr.Run(context.Background()); !errors.Is(err, boom) || res.Status != optim.Failed {
		t.Errorf("hook error: %+v, %v", res, err)
	}
}

func TestTargetLoss(t *testing.T) {
	set := irisBinary(t)
	res := train(t, mlp(t, []int{4, 8, 1}, 2, 1), set, optim.Settings{LearningRate: 0.05, BatchSize: 10, Epochs: 500, TargetLoss: 0.05})
	if res.Status != optim.Converged || !(res.Loss <= 0.05) || res.Epochs >= 500 {
		t.Errorf("%+v, want Converged with loss ≤ 0.05 before epoch 500", res)
	}
}

// TestNonFinite: an overflowing step is reported with its step and the
// weights from before it are kept.
func TestNonFinite(t *testing.T) {
	n, err := net.NewBuilder[float32](2).Dense("h", 3).ReLU("r").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 1}); err != nil {
		t.Fatal(err)
	}
	set := &data.Set[float32]{X: []float32{1, 2, 3, 4}, Y: []float32{1, -1}, Rows: 2, Features: 2, Outputs: 1}
	before := [][]float32{append([]float32(nil), n.Params()[0].Value...), append([]float32(nil), n.Params()[1].Value...)}
	tr, err := optim.NewTrainer[float32](n, loss.Square[float32]{}, set, optim.Settings{LearningRate: 1e38})
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	var nf *optim.NonFiniteError
	if !errors.As(err, &nf) || nf.Step != 1 || !strings.HasPrefix(nf.What, "update of ") || res.Status != optim.Failed {
		t.Fatalf("got %+v, %v; want a NonFiniteError at step 1 in an update", res, err)
	}
	for i, p := range n.Params() {
		for j, v := range p.Value {
			if v != before[i][j] {
				t.Fatalf("%s[%d] = %v after the failed step, was %v", p.Name, j, v, before[i][j])
			}
		}
	}
	// Inputs of 1e200 pass the data check but square to infinity in the
	// float64 loss.
	n64 := mlp(t, []int{2, 3, 1}, 1, 1)
	big := &data.Set[float64]{X: []float64{1e200, 1e200, 1e200, 1e200}, Y: []float64{1, -1}, Rows: 2, Features: 2, Outputs: 1}
	tr64, _ := optim.NewTrainer[float64](n64, loss.Square[float64]{}, big, optim.Settings{})
	if _, err := tr64.Run(context.Background()); !errors.As(err, &nf) || nf.What != "loss" || nf.Step != 1 || nf.Index != -1 {
		t.Errorf("overflowing loss: %v, want a NonFiniteError for the loss at step 1", err)
	}
}

// TestMomentum checks heavy-ball and Nesterov steps against the recursion
// written out by hand for L = w² (one weight, input 1, target 0): g = 2w.
// Heavy ball: v₁ = g₀, w₁ = w₀ − ηv₁; v₂ = μv₁ + g₁, w₂ = w₁ − ηv₂.
// Nesterov: v₁ = g₀, w₁ = w₀ − η(g₀ + μv₁); v₂ = μv₁ + g₁, w₂ = w₁ − η(g₁ + μv₂).
func TestMomentum(t *testing.T) {
	const eta, mu, w0 = 0.1, 0.9, 1.5
	set := &data.Set[float64]{X: []float64{1}, Y: []float64{0}, Rows: 1, Features: 1, Outputs: 1}
	for _, nesterov := range []bool{false, true} {
		n, err := net.NewBuilder[float64](1).Readout("w", 1).Build()
		if err != nil {
			t.Fatal(err)
		}
		n.Params()[0].Value[0] = w0
		train(t, n, set, optim.Settings{LearningRate: eta, Momentum: mu, Nesterov: nesterov, Epochs: 2})
		g0 := 2 * w0
		v1 := g0
		var w1, w2 float64
		if nesterov {
			w1 = w0 - eta*(g0+mu*v1)
			g1 := 2 * w1
			v2 := mu*v1 + g1
			w2 = w1 - eta*(g1+mu*v2)
		} else {
			w1 = w0 - eta*v1
			v2 := mu*v1 + 2*w1
			w2 = w1 - eta*v2
		}
		if got := n.Params()[0].Value[0]; math.Abs(got-w2) > 1e-15 {
			t.Errorf("nesterov=%v: w₂ = %v, want %v", nesterov, got, w2)
		}
	}
}

// TestSchedules checks the factors against their closed forms.
func TestSchedules(t *testing.T) {
	p := func(step, epoch int) optim.Progress {
		return optim.Progress{Step: step, Epoch: epoch, StepsPerEpoch: 10, Steps: 101}
	}
	cos := optim.Cosine{Floor: 0.1}
	for _, c := range []struct {
		s    optim.Schedule
		at   optim.Progress
		want float64
	}{
		{optim.Constant{}, p(50, 5), 1},
		{optim.StepDecay{Epochs: 3, By: 0.5}, p(0, 2), 1},
		{optim.StepDecay{Epochs: 3, By: 0.5}, p(0, 3), 0.5},
		{optim.StepDecay{Epochs: 3, By: 0.5}, p(0, 7), 0.25},
		{cos, p(0, 0), 1},
		{cos, p(50, 5), 0.55}, // half way: Floor + (1 − Floor)/2
		{cos, p(100, 10), 0.1},
	} {
		if got := c.s.Factor(c.at); math.Abs(got-c.want) > 1e-15 {
			t.Errorf("%#v at step %d: factor %v, want %v", c.s, c.at.Step, got, c.want)
		}
	}
}

// recorder is a model that passes through to a network and records the
// first feature of every row it is given: the row's identity.
type recorder struct {
	*net.Network[float64]
	seen []float64
}

func (r *recorder) Forward(x []float64, rows int) []float64 {
	for i := range rows {
		r.seen = append(r.seen, x[i*r.In()])
	}
	return r.Network.Forward(x, rows)
}

// TestSampling: shuffled epochs visit every row once per epoch; independent
// draws sample with replacement, so a full-size batch holds on average
// 1 − (1 − 1/N)^N ≈ 63.2% distinct rows (common practice, no source: the
// occupancy expectation). With N = 400 and 20 batches, the standard
// deviation of the mean distinct fraction is about 0.0024/√20·√... — under
// 0.005 — so ±0.02 is four standard deviations.
func TestSampling(t *testing.T) {
	const N = 400
	set := &data.Set[float64]{Rows: N, Features: 1, Outputs: 1, X: make([]float64, N), Y: make([]float64, N)}
	for i := range N {
		set.X[i] = float64(i)
		set.Y[i] = 1
	}
	mk := func() *recorder {
		n, err := net.NewBuilder[float64](1).Readout("w", 1).Build()
		if err != nil {
			t.Fatal(err)
		}
		return &recorder{Network: n}
	}
	r := mk()
	train(t, r, set, optim.Settings{LearningRate: 1e-9, BatchSize: 64, Epochs: 3})
	if len(r.seen) != 3*N {
		t.Fatalf("shuffled: %d rows seen in 3 epochs, want %d", len(r.seen), 3*N)
	}
	for e := range 3 {
		count := make([]int, N)
		for _, v := range r.seen[e*N : (e+1)*N] {
			count[int(v)]++
		}
		for i, c := range count {
			if c != 1 {
				t.Fatalf("shuffled epoch %d: row %d seen %d times", e, i, c)
			}
		}
		if e > 0 && r.seen[e*N] == r.seen[(e-1)*N] && r.seen[e*N+1] == r.seen[(e-1)*N+1] {
			t.Errorf("epoch %d starts in the same order as the one before", e)
		}
	}
	r = mk()
	train(t, r, set, optim.Settings{LearningRate: 1e-9, BatchSize: N, Sampling: optim.Independent, Epochs: 20})
	distinct := 0.0
	for e := range 20 {
		seen := map[float64]bool{}
		for _, v := range r.seen[e*N : (e+1)*N] {
			seen[v] = true
		}
		distinct += float64(len(seen)) / N / 20
	}
	want := 1 - math.Pow(1-1.0/N, N)
	if math.Abs(distinct-want) > 0.02 {
		t.Errorf("independent draws: %.4f of each batch distinct, want %.4f ± 0.02", distinct, want)
	}
}

func TestSettingsErrors(t *testing.T) {
	set := randomSet(4, 10, 2, 2)
	n := mlp(t, []int{2, 3, 2}, 1, 1)
	for _, s := range []optim.Settings{
		{LearningRate: -1}, {BatchSize: -2}, {Momentum: 1}, {WeightDecay: -0.1},
		{Temperature: math.NaN()}, {Epochs: -1}, {TargetLoss: -1}, {Sampling: 7},
	} {
		if _, err := optim.NewTrainer[float64](n, loss.Square[float64]{}, set, s); err == nil || !strings.Contains(err.Error(), "Settings.") {
			t.Errorf("%+v: error %v, want one naming the setting", s, err)
		}
	}
	if _, err := optim.NewTrainer[float64](n, loss.Square[float64]{}, randomSet(4, 10, 3, 2), optim.Settings{}); err == nil {
		t.Error("3 features into a 2-input network accepted")
	}
	bad := randomSet(4, 10, 2, 2)
	bad.X[7] = math.Inf(1)
	var re *data.RowError
	if _, err := optim.NewTrainer[float64](n, loss.Square[float64]{}, bad, optim.Settings{}); !errors.As(err, &re) || re.Row != 3 || re.Column != 1 {
		t.Errorf("infinite feature: %v, want a RowError at row 3, column 1", err)
	}
}

func TestJSONLines(t *testing.T) {
	set := randomSet(5, 30, 3, 3)
	var buf bytes.Buffer
	h := optim.JSONLines(&buf, 2)
	h.EpochMargins = true
	tr, err := optim.NewTrainer[float64](mlp(t, []int{3, 5, 3}, 1, 1), loss.CrossEntropy[float64]{}, set, optim.Settings{BatchSize: 10, Epochs: 2, Hooks: h})
	if err != nil {
		t.Fatal(err)
	}
	if _, err := tr.Run(context.Background()); err != nil {
		t.Fatal(err)
	}
	var steps, epochs int
	sc := bufio.NewScanner(&buf)
	for sc.Scan() {
		var rec map[string]any
		if err := json.Unmarshal(sc.Bytes(), &rec); err != nil {
			t.Fatalf("line %q: %v", sc.Text(), err)
		}
		switch rec["kind"] {
		case "step":
			steps++
			if rec["rho_equilibrium"] != nil {
				t.Errorf("cross-entropy has no closed-form ρ*, got %v", rec["rho_equilibrium"])
			}
			if l, ok := rec["layer_rho"].([]any); !ok || len(l) != 2 {
				t.Errorf("layer_rho %v, want two layers", rec["layer_rho"])
			}
		case "epoch":
			epochs++
			if m, ok := rec["train_margins"].(map[string]any); !ok || m["rows"] != 30.0 {
				t.Errorf("epoch record without the training set's margins: %v", rec)
			}
		}
	}
	if steps != 3 || epochs != 2 { // 6 steps, every second one
		t.Errorf("%d step and %d epoch records, want 3 and 2", steps, epochs)
	}
}

func TestJoin(t *testing.T) {
	var order []string
	a := &optim.Hooks{Step: func(*optim.StepInfo) error { order = append(order, "a"); return nil }, FullMarginsEvery: 5}
	b := &optim.Hooks{Step: func(*optim.StepInfo) error { order = append(order, "b"); return optim.ErrStop },
		Epoch: func(*optim.EpochInfo) error { return nil }, FullMarginsEvery: 3, EpochMargins: true}
	j := optim.Join(a, nil, b)
	if j.FullMarginsEvery != 3 || !j.EpochMargins || j.Epoch == nil {
		t.Errorf("joined %+v", j)
	}
	if err := j.Step(&optim.StepInfo{}); !errors.Is(err, optim.ErrStop) || strings.Join(order, "") != "ab" {
		t.Errorf("joined step: %v, called %v", err, order)
	}
	if optim.Join().Step != nil {
		t.Error("joining nothing gave a step hook")
	}
}

// TestFullMarginsUseCurrentScale: the whole-set margins the trainer reports
// for a normalized model are those of the weights after the step,
// f(x; W)/ρ with W = ρ·V as it stands then (the definition in hooks.go).
func TestFullMarginsUseCurrentScale(t *testing.T) {
	set := irisBinary(t)
	for name, o := range map[string]normalize.Options{
		"global": {Scale: normalize.Global}, "per-layer": {Scale: normalize.PerLayer}, "per-unit": {PerUnit: true},
	} {
		w, err := normalize.Wrap(mlp(t, []int{4, 6, 1}, 3, 0.5), o)
		if err != nil {
			t.Fatal(err)
		}
		var got optim.Margins
		var rho float64
		h := &optim.Hooks{EpochMargins: true, Epoch: func(e *optim.EpochInfo) error { got, rho = *e.Full, e.Rho; return optim.ErrStop }}
		train(t, w, set, optim.Settings{LearningRate: 0.1, BatchSize: 15, Hooks: h})
		out := w.Forward(set.X, set.Rows)
		r := w.Base().Rho()
		mean := 0.0
		for i := range set.Rows {
			mean += set.Y[i] * out[i] / r / float64(set.Rows)
		}
		// Same sums in a different order: a few ε relative.
		if math.Abs(rho-r) > 1e-14*r || math.Abs(got.Mean-mean) > 1e-12 {
			t.Errorf("%s: epoch info ρ %v, margins mean %v; current weights give ρ %v, mean %v", name, rho, got.Mean, r, mean)
		}
	}
}
