package net_test

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"testing"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/net"
)

// fitted returns a PolyReLU[float64] connected with width 1.
func fitted(t *testing.T, degree int, lo, hi float64, fit net.Fit) *net.PolyReLU[float64] {
	t.Helper()
	p := net.NewPolyReLU[float64]("poly", degree, lo, hi, fit)
	if _, err := p.Connect(1); err != nil {
		t.Fatalf("degree %d on [%g, %g], %v: %v", degree, lo, hi, fit, err)
	}
	return p
}

// eval runs a connected width-1 node on xs.
func eval(nd net.Node[float64], xs []float64) []float64 {
	y := make([]float64, len(xs))
	nd.Forward(xs, y, len(xs))
	return y
}

// chebNodes returns the m Chebyshev nodes of the first kind of [lo, hi],
// written out from their definition: (lo+hi)/2 + (hi−lo)/2·cos(π(2j+1)/(2m)).
func chebNodes(m int, lo, hi float64) []float64 {
	x := make([]float64, m)
	for j := range x {
		x[j] = (lo+hi)/2 + (hi-lo)/2*math.Cos(math.Pi*float64(2*j+1)/float64(2*m))
	}
	return x
}

var fits = []net.Fit{net.FitLeastSquares, net.FitInterpolation}

func TestPolyReLUConform(t *testing.T) {
	cases := []struct {
		degree      int
		lo, hi      float64
		width, rows int
	}{
		{1, -1, 1, 1, 1},
		{2, -1, 1, 3, 5},
		{5, -0.5, 2, 4, 3},
		{16, -3, 3, 17, 2},
	}
	for _, fit := range fits {
		for _, c := range cases {
			t.Run(fmt.Sprintf("%v/degree=%d/width=%d/rows=%d", fit, c.degree, c.width, c.rows), func(t *testing.T) {
				// Inputs inside the interval, where the node is meant to be used;
				// the polynomial is smooth, so no point needs avoiding.
				lo, hi := c.lo, c.hi
				conform.Node(t, net.NewPolyReLU[float64]("poly", c.degree, lo, hi, fit), c.width, c.width, c.rows,
					func(r *rand.Rand) float64 { return lo + (hi-lo)*r.Float64() })
			})
		}
	}
}

// Degrees 1 and 2 by hand (closed form). The d+1 = 2 nodes are ±1/√2, and
// the line through (−1/√2, 0) and (1/√2, 1/√2) is p(t) = t/2 + 1/(2√2):
// c = (1/(2√2), 1/2). Its largest error on [−1, 1] is at t = 0, where it is
// 1/(2√2) (at t = ±1 it is 1/2 − 1/(2√2)). The 3 nodes are 0, ±√3/2, where
// ReLU is 0, 0, √3/2; the parabola through them is p(t) = t²/√3 + t/2 =
// (T_0 + T_2)/(2√3) + T_1/2, by t² = (T_0 + T_2)/2: c = (1/(2√3), 1/2,
// 1/(2√3)). Outside [−1, 1] the node extrapolates that parabola.
//
// Tolerances: each coefficient sums at most three products of rounded
// nodes and cosines, a few ulps each, so 16ε. A value at t adds Clenshaw's
// rounding and scales the coefficient errors by Σ|T_k(t)| ≤ 3(1 + t²), so
// 64ε(1 + t²).
func TestPolyReLUInterpolationClosedForm(t *testing.T) {
	r2, r3 := math.Sqrt2, math.Sqrt(3)
	p1 := fitted(t, 1, -1, 1, net.FitInterpolation)
	p2 := fitted(t, 2, -1, 1, net.FitInterpolation)
	for _, c := range []struct {
		p    *net.PolyReLU[float64]
		want []float64
	}{{p1, []float64{1 / (2 * r2), 0.5}}, {p2, []float64{1 / (2 * r3), 0.5, 1 / (2 * r3)}}} {
		got := c.p.Coefficients()
		if len(got) != len(c.want) || !floats.EqualApprox(got, c.want, 16*eps) {
			t.Errorf("degree %d: coefficients %v, want %v", c.p.Degree(), got, c.want)
		}
	}
	if e := maxErr(p1, -1, 1); math.Abs(e-1/(2*r2)) > 16*eps {
		t.Errorf("degree 1: uniform error %.17g, want 1/(2√2) = %.17g", e, 1/(2*r2))
	}
	xs := []float64{-3, -1, -0.5, 0, 0.25, r3 / 2, 1, 2, 5}
	for i, y := range eval(p2, xs) {
		x := xs[i]
		if want := x*x/r3 + x/2; math.Abs(y-want) > 64*eps*(1+x*x) {
			t.Errorf("degree 2 at x = %g: p = %.17g, want x²/√3 + x/2 = %.17g", x, y, want)
		}
	}
}

// maxErr returns max |p(x) − ReLU(x)| over a grid of 20001 points of
// [lo, hi] holding both ends (and 0 when lo = −hi).
func maxErr(p *net.PolyReLU[float64], lo, hi float64) float64 {
	const n = 20001
	xs := make([]float64, n)
	for i := range xs {
		xs[i] = lo + (hi-lo)*float64(i)/(n-1)
	}
	e := 0.0
	for i, y := range eval(p, xs) {
		e = max(e, math.Abs(y-max(xs[i], 0)))
	}
	return e
}

// Interpolation is exact at the nodes (by definition). Tolerance: each
// cosine in the coefficient sums has an argument of up to dπ ≈ 200, hence
// an error near 200ε ≈ 4e-14; the sums average them with weights ≤ 2/n,
// and Clenshaw adds O(d²ε) ≈ 5e-13 at d = 64 (its error grows at most
// quadratically in the degree; from memory). Scaled by the size of ReLU on
// the interval, max(|a|, |b|), 1e-12 covers both.
func TestPolyReLUInterpolatesAtNodes(t *testing.T) {
	for _, iv := range [][2]float64{{-1, 1}, {-0.5, 2}, {-4, 1}, {1, 3}} {
		for _, d := range []int{1, 2, 3, 7, 16, 33, 64} {
			p := fitted(t, d, iv[0], iv[1], net.FitInterpolation)
			xs := chebNodes(d+1, iv[0], iv[1])
			tol := 1e-12 * max(math.Abs(iv[0]), math.Abs(iv[1]))
			for i, y := range eval(p, xs) {
				if math.Abs(y-max(xs[i], 0)) > tol {
					t.Errorf("degree %d on %v: p(%.17g) = %.17g, want ReLU = %.17g", d, iv, xs[i], y, max(xs[i], 0))
				}
			}
		}
	}
}

// The Chebyshev series of ReLU on [−1, 1] (closed form, derived): with
// t = cos θ, a_k = (2/π)∫_0^{π/2} cos θ cos kθ dθ (a_0 with 1/π), giving
// a_0 = 1/π, a_1 = 1/2, a_{2j} = (2/π)(−1)^{j+1}/(4j² − 1), and 0 for odd
// k ≥ 3; this is ReLU = (t + |t|)/2 with the classical series of |t|.
// Truncating after degree d leaves the tail Σ_{k>d}|a_k|, which telescopes,
// (1/π)Σ_{2j>d}(1/(2j−1) − 1/(2j+1)), to τ_d = 1/(π(d+1)) for even d and
// 1/(πd) for odd d; at t = 0 every tail term has the same sign, so τ_d is
// the truncation's exact uniform error.
func tail(d int) float64 {
	if d%2 == 1 {
		return 1 / (math.Pi * float64(d))
	}
	return 1 / (math.Pi * float64(d+1))
}

// Error of Chebyshev interpolation, for even degrees d doubling from 2 to
// 64. It decays like 1/d, the known rate for functions with a kink like
// |x| (approximation theory, from memory). Checked as bounds:
//   - above: the interpolant aliases T_k (k > d) onto a polynomial bounded
//     by 1, so its error is at most 2τ_d = 2/(π(d+1)) (tail above);
//   - below: no polynomial of degree d does better than the best
//     approximation, E_d(ReLU) = E_d(|x|)/2 (x/2 is a polynomial), and
//     d·E_d(|x|) → 0.2802 (Bernstein's constant, from memory), with
//     E_2(|x|) = 1/8 exactly (x² + 1/8 equioscillates at 0, ±1/2, ±1):
//     d·E_d(ReLU) is 0.125 at d = 2 and near 0.14 later, so 0.1/d is a
//     lower bound with margin;
//   - and the error falls each time d doubles.
//
// Odd degrees are left out: on a symmetric interval they gain nothing
// (ReLU's odd part x/2 is fitted exactly at degree 1), and interpolation at
// d = 3 is worse than at d = 2.
func TestPolyReLUInterpolationErrorDecay(t *testing.T) {
	prev := math.Inf(1)
	for d := 2; d <= 64; d *= 2 {
		e := maxErr(fitted(t, d, -1, 1, net.FitInterpolation), -1, 1)
		if lo, hi := 0.1/float64(d), 2*tail(d); e < lo || e > hi || e >= prev {
			t.Errorf("degree %d: uniform error %.4g, want in [0.1/d, 2/(π(d+1))] = [%.4g, %.4g] and below %.4g (degree %d)", d, e, lo, hi, prev, d/2)
		}
		prev = e
	}
}

// Least squares on M Chebyshev nodes is discrete Chebyshev truncation: over
// the M nodes of the first kind the T_k, k < M, are orthogonal,
// Σ_j T_k(t_j)T_l(t_j) = 0 for k ≠ l, M/2 for k = l ≥ 1, M for k = l = 0
// (discrete orthogonality; Mason and Handscomb, Chebyshev Polynomials,
// from memory), so the normal equations are diagonal and
// c_k = Σ_j f(t_j)T_k(t_j) / Σ_j T_k(t_j)². It differs from the true a_k only
// by aliasing, c_k − a_k = Σ_{m≥1} (−1)^m (a_{2mM−k} + a_{2mM+k}), each term
// below (2/π)/(2mM − d)² by the series above; summed over m (π²/6) and over
// the ≤ d/2 + 1 even k, with M = 50(d+1), the uniform effect is below
// 1.1e-4/(d+1), a relative 3.4e-4 of τ_d. So the fit's uniform error is τ_d
// to within 5e-4 relative: closed form, every degree.
func TestPolyReLULeastSquaresUniformError(t *testing.T) {
	for _, d := range []int{1, 2, 3, 4, 8, 16, 32, 64} {
		e := maxErr(fitted(t, d, -1, 1, net.FitLeastSquares), -1, 1)
		if want := tail(d); math.Abs(e-want) > 5e-4*want {
			t.Errorf("degree %d: uniform error %.8g, want τ_d = %.8g within 5e-4 relative", d, e, want)
		}
	}
}

// Degree 2 in closed form for the exact point set (M = 150, t_j = cos θ_j,
// θ_j = π(2j+1)/(2M)). With the diagonal normal equations above and
// ReLU(t_j) = cos θ_j for j < M/2 (0 after), the sums are
// Σ_{j<n} cos((2j+1)φ) = sin(2nφ)/(2 sin φ) with n = M/2:
//
//	c_0 = (1/M) Σ cos θ_j = 1/(2M sin(π/(2M))),
//	c_1 = (2/M) Σ cos² θ_j = (1/M)(M/2 + Σ cos 2θ_j) = 1/2 (the last sum is 0),
//	c_2 = (2/M) Σ cos θ_j cos 2θ_j = (1/M) Σ (cos 3θ_j + cos θ_j)
//	    = (1/(2M))(1/sin(π/(2M)) − 1/sin(3π/(2M))),
//
// which tend to a_0 = 1/π, a_1 = 1/2 and a_2 = 2/(3π) as M grows.
// Tolerance: the fit (internal/arith) sums the M terms of each normal
// equation in order; a recursive sum of M terms of size at most 1 errs by
// at most about M·ε ≈ 150·1.1e-16 ≈ 1.7e-14 (Higham, Accuracy and
// Stability of Numerical Algorithms, §4.2, from memory), and the
// recurrence for T_k adds a few ε per term at degree 2, so 1e-13.
func TestPolyReLULeastSquaresDegree2ClosedForm(t *testing.T) {
	const m = 150
	if m != net.PolyPointsPerCoef*3 {
		t.Fatalf("closed form written for M = 150, but PolyPointsPerCoef·3 = %d", net.PolyPointsPerCoef*3)
	}
	s1, s3 := math.Sin(math.Pi/(2*m)), math.Sin(3*math.Pi/(2*m))
	want := []float64{1 / (2 * m * s1), 0.5, (1/s1 - 1/s3) / (2 * m)}
	got := fitted(t, 2, -1, 1, net.FitLeastSquares).Coefficients()
	if !floats.EqualApprox(got, want, 1e-13) {
		t.Errorf("coefficients %.17g, want %.17g", got, want)
	}
}

// An independent least-squares fit on the same points in the monomial
// basis, solved by gonum's mat.Dense.Solve (QR on the Vandermonde matrix),
// must give Monomial's coefficients. Tolerance: with a nonzero residual the
// solution's sensitivity grows like cond(V)² (Golub and Van Loan, Matrix
// Computations, §5.3, from memory), so M·ε·cond(V)² relative, computed
// per case; a wrong shift or scale in Monomial gives errors of order 1.
func TestPolyReLUMonomialAgainstVandermonde(t *testing.T) {
	for _, c := range []struct {
		d      int
		lo, hi float64
	}{{2, -1, 1}, {3, -0.5, 2}, {4, -2, 2}, {5, -1, 3}} {
		n := c.d + 1
		m := net.PolyPointsPerCoef * n
		xs := chebNodes(m, c.lo, c.hi)
		v := mat.NewDense(m, n, nil)
		f := mat.NewDense(m, 1, nil)
		for j, x := range xs {
			for k := range n {
				v.Set(j, k, math.Pow(x, float64(k)))
			}
			f.Set(j, 0, max(x, 0))
		}
		var ref mat.Dense
		if err := ref.Solve(v, f); err != nil {
			t.Fatal(err)
		}
		want := mat.Col(nil, 0, &ref)
		got := fitted(t, c.d, c.lo, c.hi, net.FitLeastSquares).Monomial()
		cond := mat.Cond(v, 2)
		tol := float64(m) * eps * cond * cond
		if len(got) != n || floats.Distance(got, want, 2) > tol*floats.Norm(want, 2) {
			t.Errorf("degree %d on [%g, %g]: Monomial %v, want %v (relative tolerance %.2g, cond %.3g)", c.d, c.lo, c.hi, got, want, tol, cond)
		}
	}
}

// ReLU = (x + |x|)/2, and on a symmetric interval [−b, b] x = bt, so
// ReLU = bt/2 + b|t|/2. Both fits are linear in the data, reproduce every
// polynomial of degree ≤ d (interpolation is unique; a polynomial has zero
// least-squares residual), and respect the symmetry t → −t of the nodes
// (the mirror image of the fit of an even function is again its fit, and
// the fit is unique): so bt/2 is fitted by (b/2)T_1 and b|t|/2 by even T_k
// only. Hence c_1 = b/2 and c_k = 0 for odd k ≥ 3 (derived).
// Tolerance: as for TestPolyReLUInterpolatesAtNodes, 1e-12·b.
func TestPolyReLUOddPart(t *testing.T) {
	for _, b := range []float64{1, 3} {
		for _, fit := range fits {
			for _, d := range []int{1, 2, 3, 6, 9, 16, 64} {
				c := fitted(t, d, -b, b, fit).Coefficients()
				tol := 1e-12 * b
				if math.Abs(c[1]-b/2) > tol {
					t.Errorf("%v, degree %d on [−%g, %g]: c_1 = %.17g, want b/2 = %g", fit, d, b, b, c[1], b/2)
				}
				for k := 3; k <= d; k += 2 {
					if math.Abs(c[k]) > tol {
						t.Errorf("%v, degree %d on [−%g, %g]: c_%d = %.3g, want 0", fit, d, b, b, k, c[k])
					}
				}
			}
		}
	}
}

// The float32 node fits in float64 like the float64 node and evaluates in
// float64, rounding once: see within32 for the bound.
func TestPolyReLUFloat32(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 1))
	const n = 1000
	x32 := make([]float32, n)
	x64 := make([]float64, n)
	dy32, dy64 := make([]float32, n), make([]float64, n)
	for i := range x32 {
		x32[i] = float32(-2.2 + 5*rng.Float64()) // [−2.2, 2.8]: inside and just outside the interval
		x64[i] = float64(x32[i])
		dy32[i] = float32(rng.NormFloat64())
		dy64[i] = float64(dy32[i])
	}
	// An interval whose midpoint, 0.3, is not a float32 number, so that
	// mapping x to t in float32 would show.
	for _, fit := range fits {
		agree32(t, fmt.Sprint(fit), net.NewPolyReLU[float32]("p", 8, -1.7, 2.3, fit), net.NewPolyReLU[float64]("p", 8, -1.7, 2.3, fit), x32, x64, dy32, dy64)
	}
}

func TestPolyReLUConnectErrors(t *testing.T) {
	nan, inf := math.NaN(), math.Inf(1)
	for _, c := range []struct {
		degree int
		lo, hi float64
		fit    net.Fit
		in     int
		want   string
	}{
		{0, -1, 1, net.FitLeastSquares, 1, "degree 0"},
		{-3, -1, 1, net.FitLeastSquares, 1, "degree -3"},
		{net.PolyMaxDegree + 1, -1, 1, net.FitInterpolation, 1, fmt.Sprintf("degree %d: want a degree from 1 to %d", net.PolyMaxDegree+1, net.PolyMaxDegree)},
		{2, 1, 1, net.FitLeastSquares, 1, "want lo < hi"},
		{2, 2, -1, net.FitInterpolation, 1, "want lo < hi"},
		{2, nan, 1, net.FitLeastSquares, 1, "must be finite"},
		{2, -1, inf, net.FitLeastSquares, 1, "must be finite"},
		{2, -math.MaxFloat64, math.MaxFloat64, net.FitLeastSquares, 1, "too narrow or too wide"},
		{2, -1, 1, net.Fit(7), 1, "fit Fit(7)"},
		{2, -1, 1, net.FitLeastSquares, 0, "input width 0"},
	} {
		p := net.NewPolyReLU[float64]("poly", c.degree, c.lo, c.hi, c.fit)
		if _, err := p.Connect(c.in); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("degree %d on [%v, %v], %v, width %d: Connect error %v, want one containing %q", c.degree, c.lo, c.hi, c.fit, c.in, err, c.want)
		}
		if p.Coefficients() != nil || p.Monomial() != nil {
			t.Errorf("degree %d on [%v, %v]: coefficients after a failed Connect", c.degree, c.lo, c.hi)
		}
	}
	p := net.NewPolyReLU[float32]("poly", 3, -1, 2, net.FitInterpolation)
	if lo, hi := p.Interval(); p.Kind() != "poly-relu" || p.Degree() != 3 || lo != -1 || hi != 2 || p.Fit() != net.FitInterpolation || p.Params() != nil {
		t.Errorf("accessors: Kind %q, Degree %d, Interval [%g, %g], Fit %v, Params %v", p.Kind(), p.Degree(), lo, hi, p.Fit(), p.Params())
	}
	if s := net.FitLeastSquares.String() + " " + net.FitInterpolation.String(); s != "least-squares interpolation" {
		t.Errorf("Fit names %q", s)
	}
}
