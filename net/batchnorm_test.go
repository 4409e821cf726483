package net_test

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/net"
)

// TestBatchNormConform runs the conformance suite (gradients against
// gonum's central differences, guards, allocations) on batch
// normalization in both modes and with every combination of learned
// scale and shift. In training mode the gradient runs through the batch
// mean and variance, so the input gradient of φ = ⟨dy, BN(x)⟩ couples
// every row; central differences of φ see that coupling, so they check
// the exact batch-normalization gradient, not a per-row shortcut.
//
// Two rows are left out of the training mode: there x̂ = ±σ/√(σ²+ε) ≈ ±1
// whatever x, the input gradient is of order ε/σ² (about 1e-5 here), and
// the central differences' round-off, u·|φ|/h ≈ 1e-16/6e-6 ≈ 2e-11
// (internal/conform's documentation), is already 1e-6 of it: the check
// would measure the differences' noise, not the gradient.
func TestBatchNormConform(t *testing.T) {
	for _, training := range []bool{true, false} {
		for _, s := range []net.BatchNormSettings{{}, {Scale: true}, {Shift: true}, {Scale: true, Shift: true}} {
			for _, rows := range []int{3, 5, 8} {
				t.Run(fmt.Sprintf("training=%v/scale=%v/shift=%v/rows=%d", training, s.Scale, s.Shift, rows), func(t *testing.T) {
					b := net.NewBatchNorm[float64]("bn", s)
					b.SetTraining(training)
					conform.Node(t, b, 4, 4, rows, (*rand.Rand).NormFloat64)
				})
			}
		}
	}
}

// TestBatchNormClosedForm checks one training-mode forward pass, the
// running statistics it leaves and an inference-mode pass on a batch
// worked by hand (calculus and arithmetic; the formulas are the node's
// documentation, from memory). ε = 0.5 makes the square roots exact:
//
//	unit 0: x = 1, 2, 3, 6: mean 3, biased variance (4+1+0+9)/4 = 3.5,
//	        √(3.5 + 0.5) = 2; γ = 2, β = 0.5: y = 2(x − 3)/2 + 0.5
//	        = −1.5, −0.5, 0.5, 3.5
//	unit 1: x = −1, 0, 0, 1: mean 0, variance 2/4 = 0.5, √(0.5 + 0.5) = 1;
//	        γ = −1, β = 0: y = 1, 0, 0, −1
//
// Every value is a small dyadic rational, exact in float32 and float64,
// and every operation on them is exact, so the comparison is ==. The
// running statistics move from (0, 1) by r ← 0.9·r + 0.1·b: unit 0's
// mean to 0.3 and variance to 0.9 + 0.35 = 1.25, unit 1's mean to 0 and
// variance to 0.9 + 0.05 = 0.95, each within a few roundings of T (the
// tolerance: 4 units in the last place of T, for two products, a sum and
// the rounding to T). The inference pass then uses those, with a = γ/√(v+ε).
func TestBatchNormClosedForm(t *testing.T) {
	testBatchNormClosedForm[float64](t, 0x1p-53)
	testBatchNormClosedForm[float32](t, 0x1p-24)
}

func testBatchNormClosedForm[T net.Float](t *testing.T, u float64) {
	b := net.NewBatchNorm[T]("bn", net.BatchNormSettings{Scale: true, Shift: true, Epsilon: 0.5})
	if _, err := b.Connect(2); err != nil {
		t.Fatal(err)
	}
	b.Scale.Value[0], b.Scale.Value[1] = 2, -1
	b.Shift.Value[0] = 0.5
	x := []T{1, -1, 2, 0, 3, 0, 6, 1} // rows of (unit 0, unit 1)
	want := []T{-1.5, 1, -0.5, 0, 0.5, 0, 3.5, -1}
	y := make([]T, len(x))
	b.SetTraining(true)
	b.Forward(x, y, 4)
	for i := range y {
		if y[i] != want[i] {
			t.Errorf("%T training mode: y[%d] = %v, want %v", y[0], i, y[i], want[i])
		}
	}
	close := func(what string, got T, want float64) {
		if d := math.Abs(float64(got) - want); d > 4*u*math.Abs(want) {
			t.Errorf("%T %s = %v, want %v (difference %.3g)", got, what, got, want, d)
		}
	}
	close("running mean 0", b.Mean.Value[0], 0.3)
	close("running variance 0", b.Var.Value[0], 1.25)
	close("running mean 1", b.Mean.Value[1], 0)
	close("running variance 1", b.Var.Value[1], 0.95)
	b.SetTraining(false)
	b.Forward(x, y, 4)
	// Inference: (x − m)·γ/√(v + ε) + β with the running m and v; the
	// reference is computed in float64 from the stored (rounded) m and v,
	// so only the node's own roundings differ: a few in float64 and the
	// final one to T, within 4u|y| + 4u64·(|a||x − m| + |β|).
	for r := range 4 {
		for j := range 2 {
			m, v := float64(b.Mean.Value[j]), float64(b.Var.Value[j])
			a := float64(b.Scale.Value[j]) / math.Sqrt(v+0.5)
			ref := (float64(x[r*2+j])-m)*a + float64(b.Shift.Value[j])
			tol := 4*u*math.Abs(ref) + 4*0x1p-53*(math.Abs(a*(float64(x[r*2+j])-m))+0.5)
			if d := math.Abs(float64(y[r*2+j]) - ref); d > tol {
				t.Errorf("%T inference row %d unit %d: %v, want %v", y[0], r, j, y[r*2+j], ref)
			}
		}
	}
	// A one-row batch has variance 0: its output is β, and the running
	// statistics do not move (the node's documented rule).
	b.SetTraining(true)
	m0, v0 := b.Mean.Value[0], b.Var.Value[0]
	b.Forward(x[:2], y[:2], 1)
	if y[0] != 0.5 || y[1] != 0 || b.Mean.Value[0] != m0 || b.Var.Value[0] != v0 {
		t.Errorf("%T one row: y %v, running %v %v (were %v %v)", y[0], y[:2], b.Mean.Value[0], b.Var.Value[0], m0, v0)
	}
	// Held, a training-mode pass gives the training-mode output and
	// leaves the running statistics alone.
	b.HoldRunning(true)
	b.Forward(x, y, 4)
	b.HoldRunning(false)
	if y[0] != want[0] || y[7] != want[7] || b.Mean.Value[0] != m0 || b.Var.Value[0] != v0 {
		t.Errorf("%T held: y %v, running %v %v (were %v %v)", y[0], y, b.Mean.Value[0], b.Var.Value[0], m0, v0)
	}
}

// TestBatchNormModesAgree: when the running statistics are set to the
// batch's own mean and variance, inference mode gives what training mode
// gives on that batch. The reference statistics are computed exactly with
// math/big (256 bits) from the inputs and rounded once to T, which is what
// the node stores.
//
// Tolerance, first order in the unit roundoffs u (of T) and u64:
// training mode's own mean is a float64 sum of B terms and a division,
// off by Dμ ≤ (B+1)·u64·max|x| (Higham, Accuracy and Stability of
// Numerical Algorithms, §3.1, γ_n ≈ nu; from memory), and storing the
// exact mean in T adds u|μ|; its two-pass variance is off by at most
// (B+4)·u64·max(x−μ)² + 2·Dμ·max|x−μ| (the squares and their sum, plus
// the shifted centre), and storing it adds u·σ². A mean error moves y by
// |a|·Dμ, a variance error by |a(x−μ)|·Dσ/(2(σ²+ε)) (the derivative of
// (σ²+ε)^(−1/2)); each side computes a = γ/√(σ²+ε) and (x−μ)·a + β with
// at most 5 float64 roundings, 5·u64·(|a(x−μ)| + |β|), and rounds y to T
// once, u|y|. The sum of these per element is the bound.
func TestBatchNormModesAgree(t *testing.T) {
	testModesAgree[float64](t, 0x1p-53)
	testModesAgree[float32](t, 0x1p-24)
}

func testModesAgree[T net.Float](t *testing.T, u float64) {
	const rows, w = 16, 5
	const u64 = 0x1p-53
	rng := rand.New(rand.NewPCG(3, 9))
	b := net.NewBatchNorm[T]("bn", net.BatchNormSettings{Scale: true, Shift: true})
	if _, err := b.Connect(w); err != nil {
		t.Fatal(err)
	}
	x := make([]T, rows*w)
	for i := range x {
		x[i] = T(3 + 2*rng.NormFloat64()) // off-centre, so the mean matters
	}
	for j := range w {
		b.Scale.Value[j], b.Shift.Value[j] = T(rng.NormFloat64()), T(rng.NormFloat64())
	}
	b.SetTraining(true)
	yt := make([]T, len(x))
	b.Forward(x, yt, rows)
	mu, sig := make([]float64, w), make([]float64, w)
	maxX, maxD := make([]float64, w), make([]float64, w)
	for j := range w {
		sum := new(big.Float).SetPrec(256)
		for r := range rows {
			sum.Add(sum, new(big.Float).SetFloat64(float64(x[r*w+j])))
			maxX[j] = max(maxX[j], math.Abs(float64(x[r*w+j])))
		}
		mean := new(big.Float).SetPrec(256).Quo(sum, new(big.Float).SetInt64(rows))
		ss := new(big.Float).SetPrec(256)
		for r := range rows {
			d := new(big.Float).SetPrec(256).Sub(new(big.Float).SetFloat64(float64(x[r*w+j])), mean)
			ss.Add(ss, new(big.Float).SetPrec(256).Mul(d, d))
		}
		variance := new(big.Float).SetPrec(256).Quo(ss, new(big.Float).SetInt64(rows))
		var z T
		if _, ok := any(z).(float32); ok {
			m32, _ := mean.Float32()
			v32, _ := variance.Float32()
			b.Mean.Value[j], b.Var.Value[j] = T(m32), T(v32)
		} else {
			m64, _ := mean.Float64()
			v64, _ := variance.Float64()
			b.Mean.Value[j], b.Var.Value[j] = T(m64), T(v64)
		}
		mu[j], sig[j] = float64(b.Mean.Value[j]), float64(b.Var.Value[j])
		for r := range rows {
			maxD[j] = max(maxD[j], math.Abs(float64(x[r*w+j])-mu[j]))
		}
	}
	b.SetTraining(false)
	yi := make([]T, len(x))
	b.Forward(x, yi, rows)
	worst := 0.0
	for r := range rows {
		for j := range w {
			a := float64(b.Scale.Value[j]) / math.Sqrt(sig[j]+1e-5)
			dmu := float64(rows+1)*u64*maxX[j] + u*math.Abs(mu[j])
			dsig := float64(rows+4)*u64*maxD[j]*maxD[j] + 2*dmu*maxD[j] + u*sig[j]
			axm := math.Abs(a * (float64(x[r*w+j]) - mu[j]))
			y := float64(yt[r*w+j])
			tol := math.Abs(a)*dmu + axm*dsig/(2*(sig[j]+1e-5)) + 10*u64*(axm+math.Abs(float64(b.Shift.Value[j]))) + 2*u*math.Abs(y)
			d := math.Abs(float64(yi[r*w+j]) - y)
			worst = max(worst, d/tol)
			if d > tol {
				t.Errorf("%T row %d unit %d: inference %v, training %v: difference %.3g > %.3g", yt[0], r, j, yi[r*w+j], yt[r*w+j], d, tol)
			}
		}
	}
	t.Logf("%T: largest difference %.3g of its bound", yt[0], worst)
}

// TestBatchNormNetwork: a built network reaches its batch-norm nodes
// (mode switch, running statistics), describes them for rebuilding, and
// its training step allocates nothing after the first (a property of any
// data; the rows are invented).
func TestBatchNormNetwork(t *testing.T) {
	n, err := net.NewBuilder[float64](3).Dense("h1", 4).BatchNorm("n1", true, false).ReLU("r1").
		Dense("h2", 3).BatchNorm("n2", false, true).ReLU("r2").Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 1}); err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, r := range n.Running() {
		names = append(names, r.Name)
	}
	if fmt.Sprint(names) != "[n1.mean n1.var n2.mean n2.var]" {
		t.Errorf("running statistics %v", names)
	}
	var params []string
	for _, p := range n.Params() {
		params = append(params, p.Name)
	}
	if fmt.Sprint(params) != "[h1.W n1.scale h2.W n2.shift out.W]" {
		t.Errorf("params %v", params)
	}
	bn := n.Node("n1").(*net.BatchNorm[float64])
	if bn.Training() {
		t.Error("a new network is in training mode; want inference")
	}
	n.SetTraining(true)
	if !bn.Training() || !n.Node("n2").(*net.BatchNorm[float64]).Training() {
		t.Error("SetTraining(true) missed a node")
	}
	spec, err := n.Spec()
	if err != nil {
		t.Fatal(err)
	}
	if s := spec[1]; s.Kind != "batch-norm" || !s.Scale || s.Shift || s.Epsilon != 1e-5 {
		t.Errorf("spec of n1: %+v", s)
	}
	m, err := net.FromSpec[float64](3, spec)
	if err != nil {
		t.Fatal(err)
	}
	if got := m.Node("n2").(*net.BatchNorm[float64]).Settings(); got != (net.BatchNormSettings{Shift: true, Epsilon: 1e-5}) {
		t.Errorf("rebuilt n2: %+v", got)
	}
	x := make([]float64, 6*3)
	rng := rand.New(rand.NewPCG(1, 1))
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	dOut := make([]float64, 6*2)
	step := func() {
		n.SetTraining(true)
		n.Forward(x, 6)
		n.SetTraining(false)
		n.Backward(dOut)
	}
	step()
	if a := testing.AllocsPerRun(10, step); a != 0 {
		t.Errorf("a training pass allocates %v times", a)
	}
}
