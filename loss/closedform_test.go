package loss_test

import (
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/loss"
)

// Closed form: log(1 + e^0) = log 2 at margin 0, whatever the sign of y,
// and the gradient is −y·σ(0)/rows = −y/(2·rows) (arithmetic).
func TestLogisticMarginZero(t *testing.T) {
	out := []float64{0, 0, 0, 0}
	y := []float64{1, -1, -1, 1}
	grad := make([]float64, 4)
	if got := (loss.Logistic[float64]{}).Eval(out, y, 4, 1, grad); !near(got, math.Ln2, exactTol) {
		t.Errorf("logistic at margin 0 = %.17g, want log 2 = %.17g", got, math.Ln2)
	}
	for i, g := range grad {
		if want := -y[i] / 8; !near(g, want, exactTol) {
			t.Errorf("grad[%d] = %v, want %v", i, g, want)
		}
	}
}

// Closed form: on equal logits the softmax is uniform, 1/C, so the loss of a
// one-hot target is −log(1/C) = log C and the gradient (1/C − y)/rows
// (arithmetic). Constant offsets, including ±1e4, must not matter.
func TestCrossEntropyUniform(t *testing.T) {
	for _, c := range []int{1, 2, 3, 10, 1000} {
		for _, logit := range []float64{0, 7.5, -1e4, 1e4} {
			const rows = 2
			out := make([]float64, rows*c)
			y := make([]float64, rows*c)
			for i := range out {
				out[i] = logit
			}
			y[0], y[c+c-1] = 1, 1 // class 0, then class C−1
			grad := make([]float64, rows*c)
			if got := (loss.CrossEntropy[float64]{}).Eval(out, y, rows, c, grad); !near(got, math.Log(float64(c)), exactTol) {
				t.Errorf("C=%d logit=%v: loss %.17g, want log C = %.17g", c, logit, got, math.Log(float64(c)))
			}
			for i, g := range grad {
				if want := (1/float64(c) - y[i]) / rows; !near(g, want, exactTol) {
					t.Errorf("C=%d logit=%v: grad[%d] = %v, want %v", c, logit, i, g, want)
					break
				}
			}
		}
	}
}

// Identity (common practice, no source): two-class softmax cross-entropy on
// logits (a, b) is the logistic loss at f = a − b, with y = +1 for class 0
// and −1 for class 1, since softmax(a, b)_0 = 1/(1 + e^{b−a}) = σ(a − b).
// The gradient with respect to a is the logistic gradient with respect to f,
// and with respect to b its negative. Tolerance: both sides take a handful
// of float64 operations on the same numbers (exactTol).
func TestCrossEntropyTwoClassIsLogistic(t *testing.T) {
	pairs := [][2]float64{{0, 0}, {1, -2}, {-3, 4.5}, {0.25, 0.125}, {20, -20}, {-37, 1}, {1e4, -1e4}, {-1e4, 1e4}, {1e4, 1e4}}
	for _, p := range pairs {
		for class := range 2 {
			a, b := p[0], p[1]
			ceY := []float64{1, 0}
			yb := 1.0
			if class == 1 {
				ceY, yb = []float64{0, 1}, -1
			}
			ceG := make([]float64, 2)
			lgG := make([]float64, 1)
			ce := loss.CrossEntropy[float64]{}.Eval([]float64{a, b}, ceY, 1, 2, ceG)
			lg := loss.Logistic[float64]{}.Eval([]float64{a - b}, []float64{yb}, 1, 1, lgG)
			if !near(ce, lg, exactTol) {
				t.Errorf("logits (%v, %v), class %d: cross-entropy %.17g, logistic %.17g", a, b, class, ce, lg)
			}
			if !near(ceG[0], lgG[0], exactTol) || !near(ceG[1], -lgG[0], exactTol) {
				t.Errorf("logits (%v, %v), class %d: cross-entropy gradient %v, logistic %v", a, b, class, ceG, lgG)
			}
		}
	}
}

// ±1e4 logits: the exponentials that would overflow never appear. Expected
// values (arithmetic): cross-entropy on (1e4, −1e4, 0) has log-sum-exp 1e4
// (the other terms are below e^{−1e4}, which underflows to 0, so the
// softmax is (1, 0, 0) exactly); the loss of class j is 1e4 − f_j: 0, 2e4,
// 1e4. The logistic loss at margin ±1e4 is 0 or 1e4, gradient 0 or −y.
// The values are exact in float32 and float64; the gradients are the
// float64 values rounded once to T, so the comparisons are exact.
func TestHugeLogits(t *testing.T) {
	t.Run("float64", hugeLogits[float64])
	t.Run("float32", hugeLogits[float32])
}

func hugeLogits[T loss.Float](t *testing.T) {
	out := []T{1e4, -1e4, 0, 1e4, -1e4, 0, 1e4, -1e4, 0}
	y := []T{1, 0, 0, 0, 1, 0, 0, 0, 1}
	grad := make([]T, 9)
	got := loss.CrossEntropy[T]{}.Eval(out, y, 3, 3, grad)
	if want := (0 + 2e4 + 1e4) / 3.0; got != want {
		t.Errorf("cross-entropy = %v, want %v", got, want)
	}
	wantG := []float64{0, 0, 0, 1, -1, 0, 1, 0, -1}
	for i, g := range grad {
		if g != T(wantG[i]/3) { // the float64 value, rounded once to T
			t.Errorf("cross-entropy grad[%d] = %v, want %v", i, g, wantG[i]/3)
		}
	}

	f := []T{1e4, 1e4, -1e4, -1e4}
	yb := []T{1, -1, 1, -1}
	g := make([]T, 4)
	got = loss.Logistic[T]{}.Eval(f, yb, 4, 1, g)
	// Margins 1e4, −1e4, −1e4, 1e4: losses 0, 1e4, 1e4, 0.
	if want := 2e4 / 4.0; got != want {
		t.Errorf("logistic = %v, want %v", got, want)
	}
	wantL := []float64{0, 1, -1, 0} // −y·σ(−margin)
	for i := range g {
		if g[i] != T(wantL[i]/4) {
			t.Errorf("logistic grad[%d] = %v, want %v", i, g[i], wantL[i]/4)
		}
	}
}

// Rescaled with K = M = 1 is the plain square loss divided by C (the
// definition, with one-hot targets), and the zero value means K = M = 1.
// Tolerance: both are float64 sums of at most rows·cols = 60 non-negative
// terms, so no cancellation, and summed in different groupings their
// relative rounding errors are below (60 + 2)·ε ≈ 1.4e-14 each: 1e-13.
func TestRescaledUnitIsSquareOverC(t *testing.T) {
	const rows, cols = 6, 10
	rng := rand.New(rand.NewPCG(2, 2))
	out := make([]float64, rows*cols)
	y := make([]float64, rows*cols)
	for i := range out {
		out[i] = rng.NormFloat64()
	}
	for r := range rows {
		y[r*cols+rng.IntN(cols)] = 1
	}
	gs, gr, g0 := make([]float64, len(out)), make([]float64, len(out)), make([]float64, len(out))
	sq := loss.Square[float64]{}.Eval(out, y, rows, cols, gs)
	re := loss.Rescaled[float64]{K: 1, M: 1}.Eval(out, y, rows, cols, gr)
	if !near(re, sq/cols, 1e-13) {
		t.Errorf("rescaled K=M=1: %.17g, square/C: %.17g", re, sq/cols)
	}
	for i := range gs {
		if !near(gr[i], gs[i]/cols, 1e-13) {
			t.Errorf("grad[%d]: rescaled %v, square/C %v", i, gr[i], gs[i]/cols)
		}
	}
	if z := (loss.Rescaled[float64]{}).Eval(out, y, rows, cols, g0); z != re {
		t.Errorf("Rescaled{} = %v, Rescaled{K: 1, M: 1} = %v", z, re)
	}
}

// The package promises float64 accumulation whatever T is: on the same
// values the float32 instantiation returns exactly the float64 loss, its
// gradient is the float64 gradient rounded once, and RhoStar is the same.
// Float32 accumulation over 64 rows would be off by about 1e-7 relative and
// fail this exact comparison.
func TestFloat32IsFloat64Rounded(t *testing.T) {
	const rows, cols = 64, 5
	rng := rand.New(rand.NewPCG(3, 3))
	out64, bin64, hot64 := make([]float64, rows*cols), make([]float64, rows), make([]float64, rows*cols)
	for i := range out64 {
		out64[i] = float64(float32(2 * rng.NormFloat64()))
	}
	for r := range rows {
		bin64[r] = float64(1 - 2*rng.IntN(2))
		hot64[r*cols+rng.IntN(cols)] = 1
	}
	out32, bin32, hot32 := to32(out64), to32(bin64), to32(hot64)
	type pair struct {
		f64  loss.Func[float64]
		f32  loss.Func[float32]
		cols int
	}
	for _, p := range []pair{
		{loss.Square[float64]{}, loss.Square[float32]{}, cols},
		{loss.Square[float64]{}, loss.Square[float32]{}, 1},
		{loss.Rescaled[float64]{K: 2, M: 3}, loss.Rescaled[float32]{K: 2, M: 3}, cols},
		{loss.CrossEntropy[float64]{}, loss.CrossEntropy[float32]{}, cols},
		{loss.Logistic[float64]{}, loss.Logistic[float32]{}, 1},
		{loss.Exponential[float64]{}, loss.Exponential[float32]{}, 1},
	} {
		y64, y32 := hot64, hot32
		if p.cols == 1 {
			y64, y32 = bin64, bin32
		}
		n := rows * p.cols
		g64, g32 := make([]float64, n), make([]float32, n)
		v64 := p.f64.Eval(out64[:n], y64, rows, p.cols, g64)
		v32 := p.f32.Eval(out32[:n], y32, rows, p.cols, g32)
		if v32 != v64 {
			t.Errorf("%s cols=%d: float32 loss %.17g, float64 %.17g", p.f64.Name(), p.cols, v32, v64)
		}
		for i := range g64 {
			if g32[i] != float32(g64[i]) {
				t.Errorf("%s cols=%d: float32 grad[%d] = %v, float64 rounded %v", p.f64.Name(), p.cols, i, g32[i], float32(g64[i]))
				break
			}
		}
		if e, ok := p.f64.(loss.Equilibrium[float64]); ok {
			r64 := e.RhoStar(out64[:n], y64, rows, p.cols, 0.1)
			r32 := p.f32.(loss.Equilibrium[float32]).RhoStar(out32[:n], y32, rows, p.cols, 0.1)
			if r32 != r64 {
				t.Errorf("%s cols=%d: float32 RhoStar %.17g, float64 %.17g", p.f64.Name(), p.cols, r32, r64)
			}
		}
	}
}

func to32(v []float64) []float32 {
	w := make([]float32, len(v))
	for i, x := range v {
		w[i] = float32(x)
	}
	return w
}

// Wiring mistakes panic with a message naming the loss.
func TestMisusePanics(t *testing.T) {
	four := []float64{1, 2, 3, 4}
	for _, c := range []struct {
		want string
		fn   func()
	}{
		{"logistic: width 2, want 1", func() { loss.Logistic[float64]{}.Eval(four, four, 2, 2, nil) }},
		{"exponential: width 4, want 1", func() { loss.Exponential[float64]{}.Eval(four, four, 1, 4, nil) }},
		{"square: grad: 3 values cannot hold 2 rows of width 2", func() { loss.Square[float64]{}.Eval(four, four, 2, 2, four[:3]) }},
		{"cross-entropy: target: 3 values", func() { loss.CrossEntropy[float64]{}.Eval(four, four[:3], 2, 2, nil) }},
		{"square: 2 rows of width 0", func() { loss.Square[float64]{}.Eval(four, four, 2, 0, nil) }},
		{"rescaled-square: K = -1", func() { loss.Rescaled[float64]{K: -1}.Eval(four, four, 2, 2, nil) }},
		{"square: RhoStar: weight decay λ = -0.5", func() { loss.Square[float64]{}.RhoStar(four, four, 2, 2, -0.5) }},
		{"rescaled-square: RhoStar: weight decay λ = NaN", func() { loss.Rescaled[float64]{}.RhoStar(four, four, 2, 2, math.NaN()) }},
	} {
		func() {
			defer func() {
				msg, _ := recover().(string)
				if !strings.Contains(msg, c.want) {
					t.Errorf("panic %q, want one containing %q", msg, c.want)
				}
			}()
			c.fn()
		}()
	}
}

// A confidently right prediction has a tiny loss, which must keep its
// relative accuracy (the reason for log1p). Closed form: at margin d = 30,
// logistic and two-class cross-entropy are log(1 + x) with x = e^{−30}
// ≈ 9.4e-14, and the Taylor series log(1 + x) = x − x²/2 + O(x³) (common
// practice, no source) gives it to a relative 3e-27. Tolerance exactTol:
// a few operations, each rounding by ε. Evaluating log(1 + x) literally
// would round 1 + x to a multiple of 2.2e-16 and be off by about 1e-3
// relative.
func TestTinyLossAccurate(t *testing.T) {
	x := math.Exp(-30)
	want := x - x*x/2
	if got := (loss.Logistic[float64]{}).Eval([]float64{30}, []float64{1}, 1, 1, nil); !near(got, want, exactTol*want) {
		t.Errorf("logistic at margin 30 = %.17g, want %.17g", got, want)
	}
	if got := (loss.CrossEntropy[float64]{}).Eval([]float64{0, -30}, []float64{1, 0}, 1, 2, nil); !near(got, want, exactTol*want) {
		t.Errorf("cross-entropy on logits (0, −30), class 0 = %.17g, want %.17g", got, want)
	}
}
