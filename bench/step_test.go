package bench

import (
	"context"
	"fmt"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// arch is a network in-h1-h2-out and the batch it is trained at.
type arch struct{ in, h1, h2, out, batch int }

// archs: a Fashion-MNIST-sized network, whose products are large enough
// for rhomb's kernel to spread them over workers, and a small one, whose
// step is dominated by per-call overhead.
var archs = []arch{{784, 512, 512, 10, 128}, {16, 32, 32, 4, 32}}

func (a arch) String() string {
	return fmt.Sprintf("net=%d-%d-%d-%d/batch=%d", a.in, a.h1, a.h2, a.out, a.batch)
}

// lr is the step size of every benchmark. It does not change the work of a
// step; it is small so that b.N steps on one batch stay far from divergence
// and from denormal numbers, which would slow the arithmetic. (For a linear
// model on these inputs the top eigenvalue of the Hessian of the mean
// square loss is about 2·784·E[x]² ≈ 400, so a stable η is below 2/400 =
// 0.005; a deeper network is stiffer still.)
const lr = 1e-4

// trainerSteps is the number of steps in an epoch of BenchmarkTrainer: one
// benchmark operation is one epoch. samples/s does not depend on it, since
// the trainer's work per epoch beyond its steps (one shuffle of the row
// order) is negligible; it is kept small so that -benchtime 10x is quick.
const trainerSteps = 8

// draw returns rows Fashion-MNIST-shaped examples from rng: in inputs
// uniform in [0, 1) (pixel intensities scaled to [0, 1)) and one-hot
// targets over out classes, the class uniform. Values are drawn as float32
// whatever T is, so that the float32 and float64 problems are the same.
func draw[T net.Float](rng *rand.Rand, rows, in, out int) (x, y []T) {
	x, y = make([]T, rows*in), make([]T, rows*out)
	for i := range x {
		x[i] = T(rng.Float32())
	}
	for r := range rows {
		y[r*out+rng.IntN(out)] = 1
	}
	return x, y
}

func build[T net.Float](tb testing.TB, a arch) *net.Network[T] {
	n, err := net.NewBuilder[T](a.in).Dense("h1", a.h1).ReLU("r1").Dense("h2", a.h2).ReLU("r2").Readout("out", a.out).Build()
	if err != nil {
		tb.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Seed: 1}); err != nil {
		tb.Fatal(err)
	}
	return n
}

// step is one SGD step with rhomb's public pieces: Forward, the square
// loss, Backward, and a plain update over Params.
type step[T net.Float] struct {
	n       *net.Network[T]
	x, y, g []T
	a       arch
	exact   optim.ExactStep[T]
}

func newStep[T net.Float](tb testing.TB, a arch, rng *rand.Rand) *step[T] {
	x, y := draw[T](rng, a.batch, a.in, a.out)
	return &step[T]{n: build[T](tb, a), x: x, y: y, g: make([]T, a.batch*a.out), a: a}
}

// grads runs the forward and backward passes and returns the loss.
func (s *step[T]) grads() float64 {
	out := s.n.Forward(s.x, s.a.batch)
	l := loss.Square[T]{}.Eval(out, s.y, s.a.batch, s.a.out, s.g)
	s.n.Backward(s.g)
	return l
}

// update is the trainer's noiseless update without decay
// (optim.ExactStep, which optim.Trainer runs), so that rhomb's step times
// rhomb's update: spread over the cores for the large weight matrices.
func (s *step[T]) update() {
	for _, p := range s.n.Params() {
		s.exact.Apply(p.Value, p.Grad, nil, lr, 0, 0, false)
	}
}

// gonumStep is the same step as a Go programmer would write it with
// gonum's mat.Dense: matrices allocated once and reused as receivers of
// Mul, elementwise work on the raw data. W is out×in, as in rhomb, and a
// layer computes H = X·Wᵀ.
type gonumStep struct {
	a                            arch
	w, dw                        [3]*mat.Dense
	x, y                         *mat.Dense
	h1, r1, h2, r2, o, g, d2, d1 *mat.Dense
}

// newGonumStep copies the weights w (row-major, out×in per layer) and the
// batch x, y.
func newGonumStep(a arch, w [3][]float64, x, y []float64) *gonumStep {
	s := &gonumStep{a: a}
	dims := [3][2]int{{a.h1, a.in}, {a.h2, a.h1}, {a.out, a.h2}}
	for i, d := range dims {
		s.w[i] = mat.NewDense(d[0], d[1], append([]float64(nil), w[i]...))
		s.dw[i] = mat.NewDense(d[0], d[1], nil)
	}
	s.x = mat.NewDense(a.batch, a.in, append([]float64(nil), x...))
	s.y = mat.NewDense(a.batch, a.out, append([]float64(nil), y...))
	s.h1, s.r1, s.d1 = mat.NewDense(a.batch, a.h1, nil), mat.NewDense(a.batch, a.h1, nil), mat.NewDense(a.batch, a.h1, nil)
	s.h2, s.r2, s.d2 = mat.NewDense(a.batch, a.h2, nil), mat.NewDense(a.batch, a.h2, nil), mat.NewDense(a.batch, a.h2, nil)
	s.o, s.g = mat.NewDense(a.batch, a.out, nil), mat.NewDense(a.batch, a.out, nil)
	return s
}

func relu(dst, src *mat.Dense) {
	d := dst.RawMatrix().Data
	for i, v := range src.RawMatrix().Data {
		d[i] = max(v, 0)
	}
}

// mask zeroes d where h ≤ 0: the ReLU's derivative, taken as 0 at 0 like
// rhomb's (common practice, no source).
func mask(d, h *mat.Dense) {
	dd := d.RawMatrix().Data
	for i, v := range h.RawMatrix().Data {
		if !(v > 0) {
			dd[i] = 0
		}
	}
}

// grads runs the forward and backward passes and returns the loss, the
// mean over rows of ‖o − y‖², whose gradient is 2(o − y)/rows (calculus).
// Like rhomb's Backward it does not compute the gradient of the input.
func (s *gonumStep) grads() float64 {
	s.h1.Mul(s.x, s.w[0].T())
	relu(s.r1, s.h1)
	s.h2.Mul(s.r1, s.w[1].T())
	relu(s.r2, s.h2)
	s.o.Mul(s.r2, s.w[2].T())
	od, yd, gd := s.o.RawMatrix().Data, s.y.RawMatrix().Data, s.g.RawMatrix().Data
	scale := 2 / float64(s.a.batch)
	var sum float64
	for i, v := range od {
		d := v - yd[i]
		sum += d * d
		gd[i] = scale * d
	}
	s.dw[2].Mul(s.g.T(), s.r2) // dW3 = Gᵀ·R2
	s.d2.Mul(s.g, s.w[2])      // dR2 = G·W3
	mask(s.d2, s.h2)           // dH2
	s.dw[1].Mul(s.d2.T(), s.r1)
	s.d1.Mul(s.d2, s.w[1])
	mask(s.d1, s.h1)
	s.dw[0].Mul(s.d1.T(), s.x)
	return sum / float64(s.a.batch)
}

// update is W ← W − η·dW; it scales dW in place, which grads overwrites.
func (s *gonumStep) update() {
	for i, w := range s.w {
		s.dw[i].Scale(lr, s.dw[i])
		w.Sub(w, s.dw[i])
	}
}

func toFloat64[T net.Float](v []T) []float64 {
	f := make([]float64, len(v))
	for i, x := range v {
		f[i] = float64(x)
	}
	return f
}

// gonumFrom returns a gonum step with the weights and batch of s, copied
// exactly into float64.
func gonumFrom[T net.Float](s *step[T]) *gonumStep {
	var w [3][]float64
	for i, p := range s.n.Params() {
		w[i] = toFloat64(p.Value)
	}
	return newGonumStep(s.a, w, toFloat64(s.x), toFloat64(s.y))
}

// report checks that the run stayed finite and reports the throughput.
func report(b *testing.B, rowsPerOp int, lastLoss float64) {
	if math.IsNaN(lastLoss) || math.IsInf(lastLoss, 0) {
		b.Fatalf("loss %v after %d operations", lastLoss, b.N)
	}
	b.ReportMetric(float64(b.N*rowsPerOp)/b.Elapsed().Seconds(), "samples/s")
}

func floatName[T net.Float]() string {
	var z T
	if _, ok := any(z).(float32); ok {
		return "float=32"
	}
	return "float=64"
}

// stepper is one implementation of the training step.
type stepper interface {
	grads() float64 // forward, loss and backward; returns the loss
	update()        // the SGD update
}

// runSteps times b.N steps of s after one warm-up step, which sizes the
// network's buffers and starts the kernel's workers. Besides samples/s it
// reports the step's matrix-product work (arch.flops) per second.
func runSteps[T net.Float](b *testing.B, s stepper, a arch) {
	s.grads()
	s.update()
	b.ReportAllocs()
	b.ResetTimer()
	t0 := cpuTime()
	var l float64
	for range b.N {
		l = s.grads()
		s.update()
	}
	b.StopTimer()
	reportFlops[T](b, a.flops(), cpuTime()-t0)
	report(b, a.batch, l)
}

// BenchmarkStep is one SGD step of rhomb, written by hand from the public
// API.
func BenchmarkStep(b *testing.B) {
	for _, a := range archs {
		b.Run(a.String()+"/"+floatName[float32](), func(b *testing.B) {
			runSteps[float32](b, newStep[float32](b, a, rand.New(rand.NewPCG(1, 2))), a)
		})
		b.Run(a.String()+"/"+floatName[float64](), func(b *testing.B) {
			runSteps[float64](b, newStep[float64](b, a, rand.New(rand.NewPCG(1, 2))), a)
		})
	}
}

// BenchmarkStepGonum is the same step with gonum's mat.Dense, the baseline
// a Go programmer would write. mat has no float32 type, so it runs in
// float64 only.
func BenchmarkStepGonum(b *testing.B) {
	for _, a := range archs {
		b.Run(a.String()+"/float=64", func(b *testing.B) {
			runSteps[float64](b, gonumFrom(newStep[float64](b, a, rand.New(rand.NewPCG(1, 2)))), a)
		})
	}
}

func benchTrainer[T net.Float](b *testing.B, a arch, temperature float64) {
	rows := a.batch * trainerSteps
	x, y := draw[T](rand.New(rand.NewPCG(1, 3)), rows, a.in, a.out)
	n := build[T](b, a)
	// Warm-up: size the network's buffers for the batch, as a first step
	// would.
	n.Forward(x, a.batch)
	n.Backward(make([]T, a.batch*a.out))
	set := &data.Set[T]{X: x, Y: y, Rows: rows, Features: a.in, Outputs: a.out}
	tr, err := optim.NewTrainer[T](n, loss.Square[T]{}, set, optim.Settings{LearningRate: lr, BatchSize: a.batch, Epochs: b.N, Seed: 1, Temperature: temperature})
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	res, err := tr.Run(context.Background())
	b.StopTimer()
	if err != nil || res.Status != optim.Finished || res.Epochs != b.N || res.Steps != b.N*trainerSteps {
		b.Fatalf("Run: %+v, %v; want %d epochs of %d steps, finished", res, err, b.N, trainerSteps)
	}
	report(b, rows, res.Loss)
}

// BenchmarkTrainer is optim.Trainer's Run: one operation is one epoch of
// trainerSteps shuffled minibatch steps, with the trainer's own work
// (gathering rows, finiteness checks, saving the weights for a rollback).
// The T=1e-8 cases add the Langevin noise (one Gaussian draw per weight per
// step; the temperature does not change the work).
func BenchmarkTrainer(b *testing.B) {
	for _, a := range archs {
		b.Run(a.String()+"/"+floatName[float32](), func(b *testing.B) { benchTrainer[float32](b, a, 0) })
		b.Run(a.String()+"/"+floatName[float64](), func(b *testing.B) { benchTrainer[float64](b, a, 0) })
		b.Run(a.String()+"/"+floatName[float32]()+"/T=1e-8", func(b *testing.B) { benchTrainer[float32](b, a, 1e-8) })
		b.Run(a.String()+"/"+floatName[float64]()+"/T=1e-8", func(b *testing.B) { benchTrainer[float64](b, a, 1e-8) })
	}
}

// gamma is γ_n = n·u/(1 − n·u), the factor in the standard bound on the
// rounding error of a sum of n products, |fl(Σ x_i y_i) − Σ x_i y_i| ≤
// γ_n Σ|x_i y_i|, for any order of summation (Higham, Accuracy and
// Stability of Numerical Algorithms, 2nd ed., §3.1; from memory).
func gamma(n int, u float64) float64 {
	nu := float64(n) * u
	return nu / (1 - nu)
}

// absOf returns |m| elementwise.
func absOf(m mat.Matrix) *mat.Dense {
	var r mat.Dense
	r.Apply(func(_, _ int, v float64) float64 { return math.Abs(v) }, m)
	return &r
}

// TestSameGradients checks that the rhomb step and the gonum baseline
// compute the same gradients, so that the benchmarks compare equal work.
//
// The two differ only by rounding: they sum the same products in
// different orders (and, for float32, in a different precision). The test
// bounds that difference by running-error analysis, carried through the
// network alongside the baseline's values. For a product C = A·B with k
// terms per element, computed from operands that are themselves within E_A
// and E_B of their exact values,
//
//	|Ĉ − C| ≤ γ_{k+2}·|Â||B̂| + E_A·|B̂| + (|Â| + E_A)·E_B   (elementwise)
//
// (the first term is the dot-product bound above, with k + 2 covering the
// multiplication by alpha; the others follow from ÂB̂ − AB = (Â − A)B̂ +
// A(B̂ − B) and |A| ≤ |Â| + E_A). The ReLU is 1-Lipschitz, so its output
// inherits its input's bound. The loss gradient 2(o − y)/rows is within
// (2/rows)·E_o + γ_3·|ĝ| (three roundings: the difference, the scale, the
// conversion to T).
//
// The backward pass is compared with a reference that uses the exact
// forward values but the baseline's ReLU masks: a linear chain, which both
// implementations compute within E wherever their masks agree. (Bounding
// against the exact masks instead would treat every unit within rounding
// of 0 as uncertain; in float32 at width 784 that is 2% of the units, and
// the bound then exceeds the gradient itself.) The test reads rhomb's
// pre-activations with Network.Output and compares the masks; where they
// differ, rhomb's value is either its own pre-mask value or 0, so its
// error bound there is the whole value, |d̂| + 2E_d.
//
// Computed with the unit roundoff u of T, E bounds either implementation's
// error (float64 has the smaller u), so the two differ by at most 2E. The
// bound neglects the effect of using the baseline's values where the other
// implementation's would belong and the rounding of the bound itself, each
// at most γ_k ≤ 784·2^-24 ≈ 5·10^-5 relative to terms of E, over seven
// products: 1% slack covers them.
//
// The check is only worth something if the bound is small against the
// gradient, so the test also requires ‖2E‖ < 1%·‖g‖. That holds in float64
// for both networks (about 10^-7 for 784-512-512-10) and in float32 for
// 16-32-32-4 (about 2·10^-3), but not in float32 for 784-512-512-10: there
// the bound, a worst case that takes every sum of |w| at face value
// through six products, is about 50 times the gradient (its float64 value
// times 2^29), so that case is left out rather than checked against a
// bound that could not fail. The float32 step is the same generic code as
// the float64 one, and the baseline runs in float64 only.
func TestSameGradients(t *testing.T) {
	for _, a := range archs {
		if a.in < 784 {
			t.Run(a.String()+"/"+floatName[float32](), func(t *testing.T) { sameGradients[float32](t, a, 0x1p-24) })
		}
		t.Run(a.String()+"/"+floatName[float64](), func(t *testing.T) { sameGradients[float64](t, a, 0x1p-53) })
	}
}

func sameGradients[T net.Float](t *testing.T, a arch, u float64) {
	s := newStep[T](t, a, rand.New(rand.NewPCG(7, 7)))
	g := gonumFrom(s)
	s.grads()
	g.grads()

	// prod is the bound for C = A·B from |Â|, |B̂| and their bounds (nil
	// for an exact operand), k terms per element.
	prod := func(absA, eA, absB, eB mat.Matrix, k int) *mat.Dense {
		var e, tmp mat.Dense
		e.Mul(absA, absB)
		e.Scale(gamma(k+2, u), &e)
		if eA != nil {
			tmp.Mul(eA, absB)
			e.Add(&e, &tmp)
		}
		if eB != nil {
			var aa mat.Dense
			aa.CloneFrom(absA)
			if eA != nil {
				aa.Add(&aa, eA)
			}
			tmp.Reset()
			tmp.Mul(&aa, eB)
			e.Add(&e, &tmp)
		}
		return &e
	}
	differ := 0
	// maskBound is the bound for D = mask(H)⊙Dpre, given the baseline's
	// pre-activations h and rhomb's, hr.
	maskBound := func(h *mat.Dense, hr []T, dPre, eDPre *mat.Dense) *mat.Dense {
		r, c := h.Dims()
		e := mat.NewDense(r, c, nil)
		for i := range r {
			for j := range c {
				on, ed := h.At(i, j) > 0, eDPre.At(i, j)
				switch {
				case on != (hr[i*c+j] > 0):
					differ++
					e.Set(i, j, math.Abs(dPre.At(i, j))+2*ed)
				case on:
					e.Set(i, j, ed)
				}
			}
		}
		return e
	}
	output := func(name string) []T {
		v, _ := s.n.Output(name)
		if v == nil {
			t.Fatalf("no output of node %q", name)
		}
		return v
	}
	absX := absOf(g.x)
	absW := [3]*mat.Dense{absOf(g.w[0]), absOf(g.w[1]), absOf(g.w[2])}
	// Forward. X and W are exact in both implementations.
	eH1 := prod(absX, nil, absW[0].T(), nil, a.in)
	eH2 := prod(absOf(g.r1), eH1, absW[1].T(), nil, a.h1)
	eO := prod(absOf(g.r2), eH2, absW[2].T(), nil, a.h2)
	var eG mat.Dense
	eG.Scale(2/float64(a.batch), eO)
	{
		var r mat.Dense
		r.Scale(gamma(3, u), absOf(g.g))
		eG.Add(&eG, &r)
	}
	// Backward, in the baseline's order.
	absG := absOf(g.g)
	eDW3 := prod(absG.T(), eG.T(), absOf(g.r2), eH2, a.batch)
	var dR2 mat.Dense // before the mask
	dR2.Mul(g.g, g.w[2])
	eDR2 := prod(absG, &eG, absW[2], nil, a.out)
	eDH2 := maskBound(g.h2, output("h2"), &dR2, eDR2)
	absDH2 := absOf(g.d2)
	eDW2 := prod(absDH2.T(), eDH2.T(), absOf(g.r1), eH1, a.batch)
	var dR1 mat.Dense
	dR1.Mul(g.d2, g.w[1])
	eDR1 := prod(absDH2, eDH2, absW[1], nil, a.h2)
	eDH1 := maskBound(g.h1, output("h1"), &dR1, eDR1)
	eDW1 := prod(absOf(g.d1).T(), eDH1.T(), absX, nil, a.batch)
	t.Logf("%d of %d hidden units with different ReLU masks", differ, a.batch*(a.h1+a.h2))

	bounds := [3]*mat.Dense{eDW1, eDW2, eDW3}
	for i, p := range s.n.Params() {
		want := g.dw[i].RawMatrix().Data
		e := bounds[i].RawMatrix().Data
		worst, bad := 0.0, 0
		var eNorm, gNorm float64
		for j, v := range p.Grad {
			d := math.Abs(float64(v) - want[j])
			lim := 1.01 * 2 * e[j]
			if !(d <= lim) {
				if bad++; bad <= 3 {
					t.Errorf("%s[%d]: rhomb %v, gonum %v: |diff| %.3g > bound %.3g", p.Name, j, v, want[j], d, lim)
				}
			}
			if lim > 0 {
				worst = max(worst, d/lim)
			}
			eNorm += lim * lim
			gNorm += want[j] * want[j]
		}
		if bad > 3 {
			t.Errorf("%s: %d elements outside the bound", p.Name, bad)
		}
		// The bound must be small against the gradient, or the check could
		// not fail: if ‖bound‖ < 1%·‖g‖, a gradient off by 1% or more
		// (a missing factor, a transposed weight) breaks some element's
		// bound.
		rel := math.Sqrt(eNorm / gNorm)
		if !(rel < 0.01) {
			t.Errorf("%s: ‖bound‖/‖gradient‖ = %.3g; the check would be too loose to catch a wrong gradient", p.Name, rel)
		}
		t.Logf("%s: worst |diff|/bound %.3g, ‖bound‖/‖gradient‖ %.3g", p.Name, worst, rel)
	}
}
