package net_test

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/net"
)

const eps = 0x1p-52 // float64 machine epsilon (IEEE 754 binary64)

func TestSmoothReLUConform(t *testing.T) {
	// The node is smooth, so any input works for the finite-difference
	// check; N(0, 1) puts βx on both sides of the bend for every β here.
	for _, beta := range []float64{0.5, 1, 10} {
		for _, sz := range []struct{ width, rows int }{{1, 1}, {3, 5}, {17, 4}} {
			t.Run(fmt.Sprintf("beta=%g/width=%d/rows=%d", beta, sz.width, sz.rows), func(t *testing.T) {
				conform.Node(t, net.NewSmoothReLU[float64]("soft", beta), sz.width, sz.width, sz.rows, (*rand.Rand).NormFloat64)
			})
		}
	}
}

// forward1 runs a node of width 1 on the values xs, one per row.
func forward1[T net.Float](t *testing.T, nd net.Node[T], xs []T) []T {
	t.Helper()
	if _, err := nd.Connect(1); err != nil {
		t.Fatal(err)
	}
	y := make([]T, len(xs))
	nd.Forward(xs, y, len(xs))
	return y
}

// backward1 runs Backward on a width-1 node at xs with upstream gradient
// dy, or with dy = 1 (so it returns the slope) when dy is nil.
func backward1[T net.Float](nd net.Node[T], xs, dy []T) []T {
	y := make([]T, len(xs))
	nd.Forward(xs, y, len(xs))
	if dy == nil {
		dy = make([]T, len(xs))
		for i := range dy {
			dy[i] = 1
		}
	}
	dx := make([]T, len(xs))
	nd.Backward(xs, y, dy, dx, len(xs))
	return dx
}

// The uniform gap to ReLU. Derivation (closed form): for x ≥ 0,
// log(1 + e^{βx})/β − x = log(e^{−βx}(1 + e^{βx}))/β = log(1 + e^{−βx})/β;
// for x < 0, ReLU(x) = 0 and the gap is log(1 + e^{βx})/β. Both equal
// g(x) = log(1 + e^{−β|x|})/β > 0, which strictly decreases in |x|, so
// sup |SmoothReLU − ReLU| = g(0) = log(2)/β, attained at x = 0 only.
func TestSmoothReLUGapToReLU(t *testing.T) {
	xs := make([]float64, 0, 2001)
	for i := -1000; i <= 1000; i++ {
		xs = append(xs, float64(i)/250) // [−4, 4] in steps of 1/250, holding 0
	}
	for _, beta := range []float64{1, 10, 100, 1e4} {
		y := forward1(t, net.NewSmoothReLU[float64]("soft", beta), xs)
		gap, at := 0.0, math.NaN()
		for i, x := range xs {
			if d := math.Abs(y[i] - max(x, 0)); d > gap {
				gap, at = d, x
			}
		}
		want := math.Ln2 / beta
		// y(0) = log1p(1)/β: one rounding in log1p (math.Log1p is within
		// 1 ulp) and one in the division, so 4ε relative is ample.
		if at != 0 || math.Abs(gap-want) > 4*eps*want {
			t.Errorf("β = %g: max |SmoothReLU − ReLU| = %.17g at x = %g, want log(2)/β = %.17g at 0", beta, gap, at, want)
		}
	}
}

// Values and slopes against the textbook formulas log(1 + e^z)/β and
// 1/(1 + e^{−z}), evaluated naively (closed form). For |z| ≤ 5 the naive
// log(1 + e^z) has absolute error about ε, relative ε/log(1 + e^{−5}) ≈ 150ε;
// 1e-13 covers that with a margin of 6. The naive sigmoid makes three
// roundings, the node's about as many, so 1e-14 relative is ample.
func TestSmoothReLUClosedForm(t *testing.T) {
	for _, beta := range []float64{0.5, 2, 7} {
		var xs []float64
		for z := -5.0; z <= 5; z += 0.25 {
			xs = append(xs, z/beta)
		}
		nd := net.NewSmoothReLU[float64]("soft", beta)
		y := forward1(t, nd, xs)
		dx := backward1(nd, xs, nil)
		for i, x := range xs {
			z := beta * x
			wantY := math.Log(1+math.Exp(z)) / beta
			wantD := 1 / (1 + math.Exp(-z))
			if math.Abs(y[i]-wantY) > 1e-13*wantY {
				t.Errorf("β = %g, x = %g: y = %.17g, want log(1+e^βx)/β = %.17g", beta, x, y[i], wantY)
			}
			if math.Abs(dx[i]-wantD) > 1e-14*wantD {
				t.Errorf("β = %g, x = %g: dy/dx = %.17g, want σ(βx) = %.17g", beta, x, dx[i], wantD)
			}
		}
	}
}

// Far from the bend the naive formula overflows (e^{1000} = +Inf); the node
// must give the limits: y → max(x, 0) + log1p(e^{−|βx|})/β, where e^{−1000}
// and smaller underflow to 0 in float64 (below about e^{−745}, IEEE 754), so
// the results are exactly ReLU(x) and slopes exactly 1 and 0.
func TestSmoothReLULargeArguments(t *testing.T) {
	cases := []struct{ beta, x, y, d float64 }{
		{1, 1000, 1000, 1},
		{1, -1000, 0, 0},
		{1e3, 1, 1, 1},
		{1e3, -1, 0, 0},
		{1, 1e300, 1e300, 1},
		{1, -1e300, 0, 0},
		{1e200, 1e200, 1e200, 1}, // βx overflows to +Inf
	}
	if naive := math.Log(1 + math.Exp(1000.0)); !math.IsInf(naive, 1) {
		t.Fatalf("naive softplus(1000) = %v; the test assumes it overflows", naive)
	}
	for _, c := range cases {
		nd := net.NewSmoothReLU[float64]("soft", c.beta)
		y := forward1(t, nd, []float64{c.x})[0]
		d := backward1(nd, []float64{c.x}, nil)[0]
		if y != c.y || d != c.d {
			t.Errorf("β = %g, x = %g: y = %v, dy/dx = %v; want %v, %v", c.beta, c.x, y, d, c.y, c.d)
		}
	}
}

// Change of sharpness, from the definition (closed form):
// log(1 + e^{β·cx})/β = c·log(1 + e^{(cβ)·x})/(cβ). For c a power of two
// both sides round identically (scaling by 2^k commutes with rounding
// away from underflow and overflow), so equality is exact.
func TestSmoothReLUSharpnessScaling(t *testing.T) {
	const beta = 1.5
	xs := []float64{-3, -0.7, -1e-3, 0, 0.2, 1, 4.5}
	for _, c := range []float64{2, 0.25, 1024} {
		cx := make([]float64, len(xs))
		for i, x := range xs {
			cx[i] = c * x
		}
		lhs := forward1(t, net.NewSmoothReLU[float64]("a", beta), cx)
		rhs := forward1(t, net.NewSmoothReLU[float64]("b", c*beta), xs)
		for i := range xs {
			if lhs[i] != c*rhs[i] {
				t.Errorf("c = %g, x = %g: SmoothReLU_β(cx) = %.17g, c·SmoothReLU_cβ(x) = %.17g", c, xs[i], lhs[i], c*rhs[i])
			}
		}
	}
}

// within32 reports whether a float32 result agrees with the float64 one up
// to one rounding to float32: the node computes in float64 for both types
// (same inputs, same operations, so the same float64 value v), and rounds
// to T once. Rounding to nearest float32 moves v by at most u·|v| with
// u = 2^-24 (IEEE 754 binary32), or by 2^-150 in the subnormal range.
func within32(got float32, v float64) bool {
	return math.Abs(float64(got)-v) <= max(0x1p-24*math.Abs(v), 0x1p-150)
}

func TestSmoothReLUFloat32(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	const n = 1000
	x32 := make([]float32, n)
	x64 := make([]float64, n)
	dy32, dy64 := make([]float32, n), make([]float64, n)
	for i := range x32 {
		x32[i] = float32(3 * rng.NormFloat64())
		x64[i] = float64(x32[i]) // exact
		dy32[i] = float32(rng.NormFloat64())
		dy64[i] = float64(dy32[i])
	}
	for _, beta := range []float64{0.5, 4} {
		agree32(t, fmt.Sprintf("β = %g", beta), net.NewSmoothReLU[float32]("s", beta), net.NewSmoothReLU[float64]("s", beta), x32, x64, dy32, dy64)
	}
}

// agree32 checks that a node's float32 instantiation gives its float64
// values and input gradients within one rounding to float32 (within32).
func agree32(t *testing.T, what string, n32 net.Node[float32], n64 net.Node[float64], x32 []float32, x64 []float64, dy32 []float32, dy64 []float64) {
	t.Helper()
	y32, y64 := forward1(t, n32, x32), forward1(t, n64, x64)
	d32, d64 := backward1(n32, x32, dy32), backward1(n64, x64, dy64)
	for i := range x32 {
		if !within32(y32[i], y64[i]) || !within32(d32[i], d64[i]) {
			t.Fatalf("%s, x = %g: float32 gives y = %v, dx = %v; float64 %v, %v", what, x64[i], y32[i], d32[i], y64[i], d64[i])
		}
	}
}

func TestSmoothReLUConnectErrors(t *testing.T) {
	for _, beta := range []float64{0, -1, math.NaN(), math.Inf(1), math.Inf(-1)} {
		_, err := net.NewSmoothReLU[float64]("soft", beta).Connect(3)
		if err == nil || !strings.Contains(err.Error(), "sharpness") || !strings.Contains(err.Error(), fmt.Sprint(beta)) {
			t.Errorf("β = %v: Connect error %v, want one naming the sharpness and its value", beta, err)
		}
	}
	// log(2)/β must be representable: it overflows float32 (max ≈ 3.4e38,
	// IEEE 754) for β = 1e-40 and float64 (max ≈ 1.8e308) for β = 1e-310.
	for _, err := range []error{
		second(net.NewSmoothReLU[float32]("soft", 1e-40).Connect(3)),
		second(net.NewSmoothReLU[float64]("soft", 1e-310).Connect(3)),
	} {
		if err == nil || !strings.Contains(err.Error(), "too small") {
			t.Errorf("tiny β: Connect error %v, want one saying β is too small", err)
		}
	}
	if err := second(net.NewSmoothReLU[float64]("soft", 1e-40).Connect(3)); err != nil {
		t.Errorf("float64, β = 1e-40: Connect error %v, want none (log(2)/β ≈ 6.9e39 fits)", err)
	}
	if _, err := net.NewSmoothReLU[float64]("soft", 1).Connect(0); err == nil || !strings.Contains(err.Error(), "input width 0") {
		t.Errorf("width 0: Connect error %v, want one naming the input width", err)
	}
	// Through the builder, the error names the node.
	_, err := net.NewBuilder[float64](2).Dense("h", 3).Node(net.NewSmoothReLU[float64]("soft", -2)).Readout("out", 1).Build()
	var be *net.BuildError
	if !errors.As(err, &be) || be.Node != "soft" || be.Index != 1 {
		t.Errorf("Build with β = −2: error %v, want a *BuildError for node 1 \"soft\"", err)
	}
	if nd := net.NewSmoothReLU[float32]("soft", 3); nd.Sharpness() != 3 || nd.Kind() != "smooth-relu" || nd.Params() != nil {
		t.Errorf("Sharpness, Kind, Params = %v, %q, %v; want 3, \"smooth-relu\", nil", nd.Sharpness(), nd.Kind(), nd.Params())
	}
}

func second[A, B any](_ A, b B) B { return b }
