package conform

import (
	"math"
	"math/rand/v2"
	"regexp"
	"testing"

	"github.com/rhomb/rhomb/loss"
)

// F32Tol is the relative difference allowed between the float32 and float64
// instantiations of a loss on the same (float32-representable) inputs, for
// the value and for the gradient (RelErr). The contract asks only that the
// accumulation over the batch be in float64; the per-element arithmetic may
// be done in T. Each element then passes through at most about a dozen
// float32 roundings of unit 2⁻²⁴ ≈ 6e-8, a relative error near 1e-6 per
// term, and on the well-scaled N(0, 1) batches used here cancellation
// between terms costs at most another factor of about ten: 1e-5. A wrong
// conversion (a value truncated to an integer, a float32 overflow, a term
// computed on the wrong element) gives differences of order 1.
const F32Tol = 1e-5

// rhoTol is the relative error allowed between RhoStar and the vertex of the
// parabola through three values of the objective computed with Eval. The
// objective is exactly quadratic, so the vertex is exact up to rounding: the
// three values are float64 sums of at most a few hundred terms of size
// O(1–10) on these draws, each off by at most n·ε·|L| ≲ 1e-13 relative,
// and the curvature is ≳ 0.5, so the vertex moves by ≲ 1e-11. 1e-8 leaves
// three orders of magnitude while any wrong term in ρ* (a missing λ, a
// factor 1/N or 1/C, a sum for a mean) moves it by order 1.
const rhoTol = 1e-8

var lossName = regexp.MustCompile(`^[a-z][a-z0-9-]*$`)

// Loss checks a loss, given as its float64 and float32 instantiations of the
// same value, on one batch of rows×cols outputs drawn N(0, 1) from a fixed
// seed, with the target of each row given by target (cols values; they are
// rounded to float32 for f32, so pass representable values such as ±1 and
// one-hot rows).
//
// It checks that
//   - both report the same lower-case Name;
//   - Eval uses only the first rows·cols values of longer buffers, modifies
//     neither out nor target, writes every gradient element (grad is
//     prefilled with NaN), returns a finite value, and returns the same value
//     when grad is nil;
//   - the gradient agrees with central differences of Eval (CheckGrad);
//   - Eval allocates nothing, in either instantiation;
//   - the float32 value and gradient agree with the float64 ones within
//     F32Tol, on identical inputs;
//   - Eval panics on rows = 0 and on a short out;
//   - if the loss implements loss.Equilibrium (then both instantiations must),
//     RhoStar, for λ = 0 and λ = 0.3, is the vertex of the parabola
//     L(ρ) = Eval(ρ·f) + λρ² found from three values of L, allocates
//     nothing, and agrees across instantiations within F32Tol.
func Loss(t *testing.T, f64 loss.Func[float64], f32 loss.Func[float32], rows, cols int, target func(row int) []float64) {
	t.Helper()
	name := f64.Name()
	if !lossName.MatchString(name) {
		t.Errorf("loss Name %q is not a lower-case identifier", name)
	}
	if f32.Name() != name {
		t.Fatalf("%s: float32 instantiation is named %q", name, f32.Name())
	}
	n := rows * cols
	rng := rand.New(rand.NewPCG(1, 1))

	// Buffers one longer than needed; the extra element must be ignored.
	out := make([]float64, n+1)
	y := make([]float64, n+1)
	for i := range n {
		out[i] = float64(float32(rng.NormFloat64()))
	}
	for r := range rows {
		tr := target(r)
		if len(tr) != cols {
			t.Fatalf("%s: target(%d) has %d values, want %d", name, r, len(tr), cols)
		}
		for j, v := range tr {
			y[r*cols+j] = float64(float32(v))
		}
	}
	out[n], y[n] = guard, guard
	out0, y0 := append([]float64(nil), out...), append([]float64(nil), y...)

	grad := make([]float64, n+1)
	for i := range n {
		grad[i] = math.NaN()
	}
	grad[n] = guard
	v := f64.Eval(out, y, rows, cols, grad)
	if math.IsNaN(v) || math.IsInf(v, 0) {
		t.Errorf("%s: Eval = %v, want a finite value", name, v)
	}
	for i, g := range grad[:n] {
		if math.IsNaN(g) || math.IsInf(g, 0) {
			t.Errorf("%s: grad[%d] = %v after Eval: not written, or not finite", name, i, g)
			break
		}
	}
	if grad[n] != guard {
		t.Errorf("%s: Eval wrote grad[%d], beyond rows·cols = %d", name, n, n)
	}
	for i := range out {
		if out[i] != out0[i] || y[i] != y0[i] {
			t.Errorf("%s: Eval modified out or target at %d", name, i)
			break
		}
	}
	if w := f64.Eval(out, y, rows, cols, nil); w != v {
		t.Errorf("%s: Eval with grad = nil gives %v, with grad %v", name, w, v)
	}

	// Finite differences of the value, on the first rows·cols outputs.
	scratch := make([]float64, n)
	CheckGrad(t, name+": gradient of Eval", func(x []float64) float64 {
		return f64.Eval(x, y[:n], rows, cols, scratch)
	}, append([]float64(nil), out[:n]...), grad[:n])

	// float32 on the same values.
	out32, y32, grad32 := make([]float32, n), make([]float32, n), make([]float32, n)
	for i := range n {
		out32[i], y32[i], grad32[i] = float32(out[i]), float32(y[i]), float32(math.NaN())
	}
	v32 := f32.Eval(out32, y32, rows, cols, grad32)
	if d := math.Abs(v32 - v); !(d <= F32Tol*math.Abs(v)) {
		t.Errorf("%s: float32 Eval = %v, float64 %v: relative difference %.3g, want ≤ %g", name, v32, v, d/math.Abs(v), F32Tol)
	}
	g32 := make([]float64, n)
	for i, g := range grad32 {
		g32[i] = float64(g)
	}
	if e := RelErr(g32, grad[:n]); !(e <= F32Tol) {
		t.Errorf("%s: float32 gradient differs from float64: relative error %.3g, want ≤ %g", name, e, F32Tol)
	}

	if a := testing.AllocsPerRun(10, func() { f64.Eval(out, y, rows, cols, grad) }); a != 0 {
		t.Errorf("%s: float64 Eval allocates %v times per call, want 0", name, a)
	}
	if a := testing.AllocsPerRun(10, func() { f32.Eval(out32, y32, rows, cols, grad32) }); a != 0 {
		t.Errorf("%s: float32 Eval allocates %v times per call, want 0", name, a)
	}

	mustPanic(t, name+": Eval with rows = 0", func() { f64.Eval(out, y, 0, cols, grad) })
	mustPanic(t, name+": Eval with a short out", func() { f64.Eval(out[:n-1], y, rows, cols, grad) })

	e64, ok64 := f64.(loss.Equilibrium[float64])
	e32, ok32 := f32.(loss.Equilibrium[float32])
	if ok64 != ok32 {
		t.Fatalf("%s: float64 implements Equilibrium: %v, float32: %v", name, ok64, ok32)
	}
	if !ok64 {
		return
	}
	fs := make([]float64, n)
	for _, lambda := range []float64{0, 0.3} {
		rho := e64.RhoStar(out, y, rows, cols, lambda)
		obj := func(r float64) float64 {
			for i := range fs {
				fs[i] = r * out[i]
			}
			return f64.Eval(fs, y[:n], rows, cols, nil) + lambda*r*r
		}
		// Parabola through ρ = −1, 0, 1: L = aρ² + bρ + c.
		lm, l0, lp := obj(-1), obj(0), obj(1)
		a, b := (lp+lm-2*l0)/2, (lp-lm)/2
		if !(a > 0) {
			t.Errorf("%s: λ = %v: objective in ρ has curvature %v, want > 0", name, lambda, a)
			continue
		}
		want := -b / (2 * a)
		if d := math.Abs(rho - want); !(d <= rhoTol*max(1, math.Abs(want))) {
			t.Errorf("%s: λ = %v: RhoStar = %.12g, vertex of Eval's objective %.12g", name, lambda, rho, want)
		}
		if r32 := e32.RhoStar(out32, y32, rows, cols, lambda); !(math.Abs(r32-rho) <= F32Tol*math.Abs(rho)) {
			t.Errorf("%s: λ = %v: float32 RhoStar = %v, float64 %v", name, lambda, r32, rho)
		}
		if al := testing.AllocsPerRun(10, func() { e64.RhoStar(out, y, rows, cols, lambda) }); al != 0 {
			t.Errorf("%s: RhoStar allocates %v times per call, want 0", name, al)
		}
	}
	mustPanic(t, name+": RhoStar with λ < 0", func() { e64.RhoStar(out, y, rows, cols, -1) })
}

// mustPanic reports a failure unless fn panics.
func mustPanic(t testing.TB, what string, fn func()) {
	t.Helper()
	defer func() {
		if recover() == nil {
			t.Errorf("%s: did not panic", what)
		}
	}()
	fn()
}
