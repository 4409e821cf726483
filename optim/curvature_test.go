package optim_test

// Checks of Sharpness and StableRate against closed forms and gonum.
//
// Sharpness is compared with the dominant eigenvalue of a Hessian computed
// independently: in closed form for least squares, and by gonum's
// diff/fd.Hessian for small ReLU networks, its eigenvalues by gonum's
// mat.EigenSym (or mat.Eigen where the matrix is not symmetric). Every
// tolerance is the sum of bounds derived beside it: the reference's own
// error, the estimator's finite-difference truncation and rounding, and
// what is left of the power iteration.
//
// The data here are random draws from seeded PCGs; the facts checked
// (the Hessian of least squares, derivatives of a polynomial, the
// stability of a linear recursion) hold for any data.

import (
	"context"
	"errors"
	"math"
	"math/cmplx"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/diff/fd"
	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/normalize"
	"github.com/rhomb/rhomb/optim"
)

// Unit round-offs of float64 and float32.
const (
	cvU64 = 0x1p-53
	cvU32 = 0x1p-24
)

// cvGamma is γ_m = mu/(1 − mu), the bound on the relative error of a
// computation of m successive roundings of unit round-off u, and of a
// length-m dot product relative to the sum of the |terms| (Higham,
// Accuracy and Stability of Numerical Algorithms, §3.1; from memory).
func cvGamma(m int, u float64) float64 { return float64(m) * u / (1 - float64(m)*u) }

// cvFlat returns the concatenated values of ps in float64.
func cvFlat[T net.Float](ps []*net.Param[T]) []float64 {
	var out []float64
	for _, p := range ps {
		for _, v := range p.Value {
			out = append(out, float64(v))
		}
	}
	return out
}

// cvSetFlat writes theta into the values of ps.
func cvSetFlat(ps []*net.Param[float64], theta []float64) {
	off := 0
	for _, p := range ps {
		off += copy(p.Value, theta[off:off+len(p.Value)])
	}
}

func cvMaxAbs(a []float64) float64 {
	var m float64
	for _, v := range a {
		m = max(m, math.Abs(v))
	}
	return m
}

func cvNorm(a []float64) float64 {
	var s float64
	for _, v := range a {
		s += v * v
	}
	return math.Sqrt(s)
}

// cvObjective returns L(θ) = mean square loss + λ Σ_{Decay} ‖θ_p‖² as a
// function of the flat parameters of m, for gonum's diff/fd. It writes θ
// into the model; restore the parameters afterwards.
func cvObjective(m optim.Model[float64], x, y []float64, rows int, lambda float64) func([]float64) float64 {
	ps := m.Params()
	cols := m.Base().Out()
	return func(theta []float64) float64 {
		cvSetFlat(ps, theta)
		optim.Resync(m) // parameters written directly: bring W = ρ·V up to date
		l := loss.Square[float64]{}.Eval(m.Forward(x, rows), y, rows, cols, nil)
		off := 0
		for _, p := range ps {
			if p.Decay {
				for _, v := range theta[off : off+len(p.Value)] {
					l += lambda * v * v
				}
			}
			off += len(p.Value)
		}
		return l
	}
}

// cvRomberg evaluates a difference quotient D at the steps h, h/2, …,
// h/2^(levels−1) and combines them by Richardson extrapolation in h²
// (Romberg's table). A central difference of a polynomial of degree q has
// an error that is a polynomial in h² of degree below q/2 with no constant
// term, so levels ≥ q/2 removes the truncation error exactly, leaving
// rounding. It returns the combination and the weight of each level in
// it, from which the caller bounds the rounding.
func cvRomberg(levels int, h float64, eval func(h float64) []float64) (out, weights []float64) {
	a := make([][][]float64, levels)
	w := make([][][]float64, levels)
	for k := range levels {
		a[k] = make([][]float64, k+1)
		w[k] = make([][]float64, k+1)
		a[k][0] = eval(h / math.Pow(2, float64(k)))
		w[k][0] = make([]float64, levels)
		w[k][0][k] = 1
		for j := 1; j <= k; j++ {
			f := math.Pow(4, float64(j))
			a[k][j] = make([]float64, len(a[k][0]))
			for i := range a[k][j] {
				a[k][j][i] = (f*a[k][j-1][i] - a[k-1][j-1][i]) / (f - 1)
			}
			w[k][j] = make([]float64, levels)
			for i := range w[k][j] {
				w[k][j][i] = (f*w[k][j-1][i] - w[k-1][j-1][i]) / (f - 1)
			}
		}
	}
	return a[levels-1][levels-1], w[levels-1][levels-1]
}

// cvFDHessian returns the Hessian of f at theta from gonum's fd.Hessian
// (central formula) with Romberg extrapolation over levels steps from h,
// and a bound on the Frobenius norm of its rounding error when every
// evaluation of f is off by at most deltaF. An entry of fd.Hessian at step
// h combines four values with coefficients ±1/4 divided by h² (gonum's
// central stencil, ±½ in each direction), so its rounding is at most
// deltaF/h²; the extrapolated entry's is Σ_k |w_k|·deltaF/h_k².
func cvFDHessian(f func([]float64) float64, theta []float64, levels int, h, deltaF float64) (*mat.SymDense, float64) {
	p := len(theta)
	x := append([]float64(nil), theta...)
	flat, w := cvRomberg(levels, h, func(h float64) []float64 {
		var hs mat.SymDense
		fd.Hessian(&hs, f, x, &fd.Settings{Formula: fd.Central, Step: h})
		out := make([]float64, p*p)
		for i := range p {
			for j := range p {
				out[i*p+j] = hs.At(i, j)
			}
		}
		return out
	})
	var entry float64
	for k, wk := range w {
		hk := h / math.Pow(2, float64(k))
		entry += math.Abs(wk) * deltaF / (hk * hk)
	}
	hs := mat.NewSymDense(p, nil)
	for i := range p {
		for j := i; j < p; j++ {
			hs.SetSym(i, j, flat[i*p+j])
		}
	}
	return hs, float64(p) * entry // ‖E‖_F ≤ P·max|E_ij|
}

// cvFDGradient is cvFDHessian's twin for gonum's fd.Gradient (central
// formula): an entry at step h is (f(x+h) − f(x−h))/(2h), whose rounding is
// at most deltaF/h. The bound returned is on the Euclidean norm.
func cvFDGradient(f func([]float64) float64, theta []float64, levels int, h, deltaF float64) ([]float64, float64) {
	x := append([]float64(nil), theta...)
	g, w := cvRomberg(levels, h, func(h float64) []float64 {
		return fd.Gradient(nil, f, x, &fd.Settings{Formula: fd.Central, Step: h})
	})
	var entry float64
	for k, wk := range w {
		entry += math.Abs(wk) * deltaF / (h / math.Pow(2, float64(k)))
	}
	return g, math.Sqrt(float64(len(theta))) * entry
}

// cvSymSpectrum returns the eigenvalues of a symmetric matrix from gonum's
// EigenSym, ascending.
func cvSymSpectrum(t *testing.T, a mat.Symmetric) []float64 {
	t.Helper()
	var e mat.EigenSym
	if !e.Factorize(a, false) {
		t.Fatal("gonum EigenSym failed")
	}
	return e.Values(nil)
}

// cvDominant returns the eigenvalue of largest magnitude in vals and the
// largest magnitude among the others relative to it.
func cvDominant(vals []float64) (top, ratio float64) {
	i0 := 0
	for i, v := range vals {
		if math.Abs(v) > math.Abs(vals[i0]) {
			i0 = i
		}
	}
	var next float64
	for i, v := range vals {
		if i != i0 {
			next = max(next, math.Abs(v))
		}
	}
	return vals[i0], next / math.Abs(vals[i0])
}

// cvIterations returns enough power-iteration steps for the start
// vector's share off the top eigenvector to fall by 1e-24: the error of
// the Rayleigh quotient falls as ratio^(2k)·tan²θ₀ for a symmetric matrix
// and as ratio^k·tanθ₀ otherwise (times the condition of the eigenvector
// basis, near 1 for the matrices here, whose top eigenvalue has s near 1). A start drawn from N(0, I) in P ≤ 100
// dimensions has tanθ₀ > 1e7 only if its top coordinate is below 1e-7
// of its norm, a chance under 1e-5; past that the remaining error is below
// 1e-17 of the spread of the spectrum, far below every tolerance here.
func cvIterations(t *testing.T, ratio float64) int {
	t.Helper()
	k := int(math.Ceil(math.Log(1e-24) / math.Log(ratio)))
	if ratio >= 1 || k > 20000 {
		t.Fatalf("the dominant eigenvalue is not separated (ratio %.6f): the seeded problem is not a fair test of power iteration", ratio)
	}
	return max(k, 2)
}

// cvLinearData draws n rows of d N(0, 1) features, column j scaled by
// 2/(j+1) so that the top eigenvalue of XᵀX stands apart, and targets:
// ±1 for one output, one-hot for several.
func cvLinearData(n, d, outs int, seed uint64) (x, y []float64) {
	rng := rand.New(rand.NewPCG(seed, 0x6375727678)) // "curvx"
	x = make([]float64, n*d)
	for i := range n {
		for j := range d {
			x[i*d+j] = 2 / float64(j+1) * rng.NormFloat64()
		}
	}
	y = make([]float64, n*outs)
	for i := range n {
		if outs == 1 {
			y[i] = float64(2*rng.IntN(2) - 1)
		} else {
			y[i*outs+rng.IntN(outs)] = 1
		}
	}
	return x, y
}

// cvLinearBound bounds the error of Sharpness on the linear model
// f(x) = x̃·Wᵀ (x̃ = x with a constant 1 appended) with the square loss,
// whose gradient (2/n)(X̃Wᵀ − Y)ᵀX̃ is affine in W, so that the central
// difference has no truncation error at all. What is left is rounding.
//
// A gradient element is computed through at most m = (d + 2) + 3 + (n + 1)
// roundings: the forward product (d+1 fused steps and the final rounding
// in the kernel), the loss's difference, scaling and conversion, and the
// backward product over n rows. By the standard bound (cvGamma) it is off
// by at most γ_m times the same computation in absolute values,
//
//	G_abs[c, j] = (2/n) Σ_n |x̃_nj|·(Σ_k |x̃_nk|(|W_ck| + ε) + |y_nc|),
//
// where |W| + ε bounds the weights at both probes (ε ≥ |εv_k|). Each
// product of Sharpness is w = ĝ(θ + d₊) − ĝ(θ − d₋) with errors e± of that
// size, and its Rayleigh quotient dᵀw/dᵀd moves by at most
// ‖e₊ − e₋‖/‖d‖ ≤ 2γ_m‖G_abs‖/‖d‖. The displacement d is 2εv up to the
// rounding of θ ± εv, at most u(|θ_k| + ε) per end, so ‖d‖ ≥ 2ε −
// 2u(‖θ‖ + ε√P). Sharpness's own float64 arithmetic (the difference of
// the two gradients, the decay term, two dot products of length P) adds
// at most (2γ_P + 3u₆₄) relative to |λ|.
func cvLinearBound(x, y, theta []float64, n, d, outs int, eps, u float64) float64 {
	in := d + 1
	xt := func(i, j int) float64 {
		if j == d {
			return 1
		}
		return x[i*d+j]
	}
	var g2 float64
	for c := range outs {
		for j := range in {
			var s float64
			for i := range n {
				var f float64
				for k := range in {
					f += math.Abs(xt(i, k)) * (math.Abs(theta[c*in+k]) + eps)
				}
				s += math.Abs(xt(i, j)) * (f + math.Abs(y[i*outs+c]))
			}
			s *= 2 / float64(n)
			g2 += s * s
		}
	}
	p := len(theta)
	m := (d + 2) + 3 + (n + 1)
	dlow := 2*eps - 2*u*(cvNorm(theta)+eps*math.Sqrt(float64(p)))
	return 2 * cvGamma(m, u) * math.Sqrt(g2) / dlow
}

// Closed form: with f(x) = x̃·Wᵀ and loss.Square (mean over the n rows of
// ‖f − y‖², gradient 2(f − y)/n, see its doc), the objective
// (1/n) Σ_n Σ_c (w_c·x̃_n − y_nc)² + λ‖W‖² has, for every output c, the
// block (2/n)X̃ᵀX̃ + 2λI of second derivatives in w_c and none between
// outputs: the Hessian is block diagonal with C equal blocks (ridge
// regression; Hoerl and Kennard 1970). Its eigenvalues come from gonum's
// EigenSym on the assembled P×P matrix, P = C(d+1).
func TestSharpnessLeastSquares(t *testing.T) {
	for _, outs := range []int{1, 3} {
		t.Run(map[int]string{1: "one-output", 3: "three-outputs"}[outs], func(t *testing.T) {
			const n, d, lambda = 40, 4, 0.05
			x, y := cvLinearData(n, d, outs, uint64(outs))
			nw, err := net.NewBuilder[float64](d).ConstantFeature("one").Readout("out", outs).Build()
			if err != nil {
				t.Fatal(err)
			}
			if err := nw.Init(net.InitSettings{Seed: 5}); err != nil {
				t.Fatal(err)
			}
			in := d + 1
			p := outs * in
			xt := mat.NewDense(n, in, nil)
			for i := range n {
				for j := range d {
					xt.Set(i, j, x[i*d+j])
				}
				xt.Set(i, d, 1)
			}
			var block mat.SymDense
			block.SymOuterK(2/float64(n), xt.T()) // (2/n)X̃ᵀX̃
			h := mat.NewSymDense(p, nil)
			for c := range outs {
				for j := range in {
					for k := j; k < in; k++ {
						v := block.At(j, k)
						if j == k {
							v += 2 * lambda
						}
						h.SetSym(c*in+j, c*in+k, v)
					}
				}
			}
			vals := cvSymSpectrum(t, h)
			top := vals[p-1]
			// The gap that matters is to the next distinct eigenvalue: with
			// C outputs the top one is C-fold, and the iteration converges
			// into its eigenspace.
			bvals := cvSymSpectrum(t, &block)
			ratio := (bvals[in-2] + 2*lambda) / (bvals[in-1] + 2*lambda)
			k := cvIterations(t, ratio)

			theta := cvFlat(nw.Params())
			eps := math.Cbrt(cvU64) * max(cvNorm(theta), 1) // Sharpness's documented step
			est, err := optim.Sharpness[float64](nw, loss.Square[float64]{}, x, y, n,
				optim.SharpnessSettings{Iterations: k, Tolerance: -1, WeightDecay: lambda, Seed: 9})
			if err != nil {
				t.Fatal(err)
			}
			spread := top - vals[0]
			b := cvLinearBound(x, y, theta, n, d, outs, eps, cvU64)
			// First order b, the arithmetic of Sharpness, and the second-
			// order effect of the same errors on the direction: the noisy
			// iteration settles within an angle of about b/(λ₁ − λ₂) of
			// the top eigenspace, costing the Rayleigh quotient at most
			// the spread times its square.
			gap := top * (1 - ratio)
			tol := b + (2*cvGamma(p, cvU64)+3*cvU64)*top + spread*(b/gap)*(b/gap)
			t.Logf("λ_max %.12g (EigenSym), estimate %.12g in %d steps, |Δ| %.3g, tolerance %.3g; next/top %.3f", top, est.Value, est.Iterations, math.Abs(est.Value-top), tol, ratio)
			if math.Abs(est.Value-top) > tol {
				t.Errorf("Sharpness = %.12g, want the top eigenvalue of (2/n)X̃ᵀX̃ + 2λI, %.12g, within %.3g", est.Value, top, tol)
			}
			if est.Iterations != k || est.Converged {
				t.Errorf("with Tolerance < 0: %d steps, converged %v; want all %d steps and not converged", est.Iterations, est.Converged, k)
			}
			// The decay must be in the estimate: 2λ is far above the
			// tolerance, so an estimator that left it out would fail.
			if 2*lambda < 100*tol {
				t.Errorf("2λ = %v is not far above the tolerance %.3g: the check would not see a missing decay", 2*lambda, tol)
			}
		})
	}
}

// cvConcave is the negative of loss.Square: −mean‖f − y‖², gradient
// −2(f − y)/rows. No one trains with it; it makes an objective whose
// Hessian is known and has a negative dominant eigenvalue.
type cvConcave struct{}

func (cvConcave) Name() string { return "concave-test" }

func (cvConcave) Eval(out, target []float64, rows, cols int, grad []float64) float64 {
	l := loss.Square[float64]{}.Eval(out, target, rows, cols, grad)
	if grad != nil {
		for i := range grad[:rows*cols] {
			grad[i] = -grad[i]
		}
	}
	return -l
}

// The sign (closed form): with the concave loss above, the objective
// −(1/n)‖X̃w − y‖² + λ‖w‖² has the Hessian −(2/n)X̃ᵀX̃ + 2λI, whose
// eigenvalue of largest magnitude is 2λ − (top of (2/n)X̃ᵀX̃), negative.
// Sharpness must report it with its sign. The bound is cvLinearBound's:
// the gradient's terms are those of the square loss with the sign flipped
// (an exact operation).
func TestSharpnessNegative(t *testing.T) {
	const n, d, lambda = 40, 4, 0.05
	x, y := cvLinearData(n, d, 1, 2)
	nw, err := net.NewBuilder[float64](d).ConstantFeature("one").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := nw.Init(net.InitSettings{Seed: 6}); err != nil {
		t.Fatal(err)
	}
	in := d + 1
	xt := mat.NewDense(n, in, nil)
	for i := range n {
		for j := range d {
			xt.Set(i, j, x[i*d+j])
		}
		xt.Set(i, d, 1)
	}
	h := mat.NewSymDense(in, nil)
	h.SymOuterK(-2/float64(n), xt.T())
	for j := range in {
		h.SetSym(j, j, h.At(j, j)+2*lambda)
	}
	vals := cvSymSpectrum(t, h)
	top, ratio := cvDominant(vals)
	if top >= 0 {
		t.Fatalf("the seeded problem's dominant eigenvalue %v is not negative", top)
	}
	k := cvIterations(t, ratio)
	theta := cvFlat(nw.Params())
	eps := math.Cbrt(cvU64) * max(cvNorm(theta), 1)
	est, err := optim.Sharpness[float64](nw, cvConcave{}, x, y, n,
		optim.SharpnessSettings{Iterations: k, Tolerance: -1, WeightDecay: lambda, Seed: 2})
	if err != nil {
		t.Fatal(err)
	}
	b := cvLinearBound(x, y, theta, n, d, 1, eps, cvU64)
	gap := math.Abs(top) * (1 - ratio)
	spread := vals[in-1] - vals[0]
	tol := b + (2*cvGamma(in, cvU64)+3*cvU64)*math.Abs(top) + spread*(b/gap)*(b/gap)
	t.Logf("dominant %.12g (EigenSym), estimate %.12g in %d steps, |Δ| %.3g, tolerance %.3g", top, est.Value, est.Iterations, math.Abs(est.Value-top), tol)
	if math.Abs(est.Value-top) > tol {
		t.Errorf("Sharpness = %.12g, want the negative dominant eigenvalue %.12g within %.3g", est.Value, top, tol)
	}
}

// The float32 model against the same closed form, and against its float64
// twin: the same weights and data (float32 values, converted exactly).
// Only the arithmetic differs; the bound is cvLinearBound with the unit
// round-off of float32 and Sharpness's float32 step u₃₂^(1/3)·max(‖θ‖, 1).
func TestSharpnessFloat32(t *testing.T) {
	const n, d, outs, lambda = 40, 4, 3, 0.05
	x64, y64 := cvLinearData(n, d, outs, 7)
	x32, y32 := make([]float32, len(x64)), make([]float32, len(y64))
	for i, v := range x64 {
		x32[i] = float32(v)
		x64[i] = float64(x32[i])
	}
	for i, v := range y64 {
		y32[i] = float32(v)
	}
	n32, err := net.NewBuilder[float32](d).ConstantFeature("one").Readout("out", outs).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n32.Init(net.InitSettings{Seed: 5}); err != nil {
		t.Fatal(err)
	}
	n64, err := net.NewBuilder[float64](d).ConstantFeature("one").Readout("out", outs).Build()
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range n32.Params()[0].Value {
		n64.Params()[0].Value[i] = float64(v)
	}
	in := d + 1
	xt := mat.NewDense(n, in, nil)
	for i := range n {
		for j := range d {
			xt.Set(i, j, x64[i*d+j])
		}
		xt.Set(i, d, 1)
	}
	var block mat.SymDense
	block.SymOuterK(2/float64(n), xt.T())
	bvals := cvSymSpectrum(t, &block)
	top := bvals[in-1] + 2*lambda
	ratio := (bvals[in-2] + 2*lambda) / top
	spread := bvals[in-1] - bvals[0]
	k := cvIterations(t, ratio)
	s := optim.SharpnessSettings{Iterations: k, Tolerance: -1, WeightDecay: lambda, Seed: 9}

	e32, err := optim.Sharpness[float32](n32, loss.Square[float32]{}, x32, y32, n, s)
	if err != nil {
		t.Fatal(err)
	}
	e64, err := optim.Sharpness[float64](n64, loss.Square[float64]{}, x64, y64, n, s)
	if err != nil {
		t.Fatal(err)
	}
	theta := cvFlat(n64.Params())
	p := len(theta)
	gap := top * (1 - ratio)
	bound := func(u float64) float64 {
		eps := math.Cbrt(u) * max(cvNorm(theta), 1)
		b := cvLinearBound(x64, y64, theta, n, d, outs, eps, u)
		return b + (2*cvGamma(p, cvU64)+3*cvU64)*top + spread*(b/gap)*(b/gap)
	}
	tol32, tol64 := bound(cvU32), bound(cvU64)
	t.Logf("λ_max %.9g; float32 %.9g (|Δ| %.3g, bound %.3g); float64 %.12g (|Δ| %.3g, bound %.3g)",
		top, e32.Value, math.Abs(e32.Value-top), tol32, e64.Value, math.Abs(e64.Value-top), tol64)
	if math.Abs(e32.Value-top) > tol32 {
		t.Errorf("float32 Sharpness = %.9g, want the closed-form %.9g within %.3g", e32.Value, top, tol32)
	}
	if math.Abs(e32.Value-e64.Value) > tol32+tol64 {
		t.Errorf("float32 Sharpness = %.9g, float64 twin %.12g: differ by more than %.3g", e32.Value, e64.Value, tol32+tol64)
	}
	// The bound must be a real constraint: well below the gap to the next
	// eigenvalue, which a wrong direction or scale would land near.
	if tol32 > gap/10 {
		t.Errorf("the float32 bound %.3g is not well below the spectral gap %.3g", tol32, gap)
	}
}

// cvMultilinear describes a bias-free network whose output, with its ReLU
// pattern fixed, is multilinear in its parameter tensors (each dense
// layer's W, or each normalized layer's ρ and V): then
// |f(x; θ + z)| ≤ Π_p (‖θ_p‖ + r)·‖x‖ for any complex perturbation z of
// norm at most r, since each factor's norm grows by at most r and
// ‖W₂DW₁x‖ ≤ ‖W₂‖_F‖W₁‖_F‖x‖ for a 0/1 diagonal D.
type cvMultilinear struct {
	norms     []float64 // ‖θ_p‖ for each parameter tensor
	decay     []bool
	projected []bool    // direction whose gradient Backward projects
	xn, yn    []float64 // ‖x_n‖ and ‖y_n‖ for each row
	lambda    float64
}

func cvDescribe(m optim.Model[float64], x, y []float64, rows int, lambda float64, multiplier bool) cvMultilinear {
	d := cvMultilinear{lambda: lambda}
	for _, p := range m.Params() {
		d.norms = append(d.norms, cvNorm(cvFlat([]*net.Param[float64]{p})))
		d.decay = append(d.decay, p.Decay)
		d.projected = append(d.projected, multiplier && len(p.Name) > 2 && p.Name[len(p.Name)-2:] == ".V")
	}
	in, out := m.Base().In(), m.Base().Out()
	for i := range rows {
		d.xn = append(d.xn, cvNorm(x[i*in:(i+1)*in]))
		d.yn = append(d.yn, cvNorm(y[i*out:(i+1)*out]))
	}
	return d
}

// maxL bounds |L(θ + z)| over complex z with ‖z‖ ≤ r: the data term is a
// mean of Σ_c (f_c − y_c)², at most (|f| + ‖y‖)² per row, and the decay
// term λ Σ (‖θ_p‖ + r)².
func (d cvMultilinear) maxL(r float64) float64 {
	prod := 1.0
	for _, a := range d.norms {
		prod *= a + r
	}
	var s float64
	for i, xn := range d.xn {
		f := prod*xn + d.yn[i]
		s += f * f
	}
	s /= float64(len(d.xn))
	for k, a := range d.norms {
		if d.decay[k] {
			s += d.lambda * (a + r) * (a + r)
		}
	}
	return s
}

// truncation bounds ‖(F(θ + εv) − F(θ − εv))/(2ε) − J·v‖ for unit v, where
// F is the field Backward returns and J its derivative, by Cauchy's
// estimates (Ahlfors, Complex Analysis, §4.2.3; from memory). With the
// ReLU pattern fixed along the probe, F = P̃∇L where L is a polynomial and
// P̃ projects the directions of a Multiplier hold (identity otherwise).
// For a unit u, χ(t) = uᵀF(θ + tv) is analytic for |t| ≤ R and the
// central difference's error is Σ_{k≥3 odd} χ⁽ᵏ⁾(0)ε^(k−1)/k!, at most
// (M/R)·q/(1 − q) with q = (ε/R)² and M ≥ max_{|t|=R} |χ(t)| (Cauchy:
// |χ⁽ᵏ⁾(0)| ≤ k!M/R^k). χ(t) = ⟨P̃(t)u, ∇L(θ + tv)⟩ is a directional
// derivative of L along P̃(t)u, so by Cauchy again in a second variable s,
// M ≤ max|L| over perturbations of norm R + R'·‖P̃(t)‖, divided by R'.
// For a direction V (‖V‖ = a) moved by ta, |t| ≤ R, ‖a‖ ≤ 1:
// P = I − (V+ta)(V+ta)ᵀ/((V+ta)ᵀ(V+ta)), the denominator is at least
// a² − 2Ra − R² in modulus, so ‖P‖ ≤ 1 + (a + R)²/(a² − 2Ra − R²). The
// bound is minimized over a grid of R and R'.
func (d cvMultilinear) truncation(eps float64) float64 {
	best := math.Inf(1)
	for _, r := range []float64{0.02, 0.05, 0.1, 0.15, 0.2, 0.25, 0.3, 0.4, 0.6, 1} {
		pmax := 1.0
		for k, a := range d.norms {
			if d.projected[k] {
				den := a*a - 2*r*a - r*r
				if den <= 0 {
					pmax = math.Inf(1)
					break
				}
				pmax = max(pmax, 1+(a+r)*(a+r)/den)
			}
		}
		if math.IsInf(pmax, 1) {
			continue
		}
		q := (eps / r) * (eps / r)
		for _, r2 := range []float64{0.05, 0.1, 0.2, 0.3, 0.5, 0.75, 1, 1.5, 2} {
			m := d.maxL(r+r2*pmax) / r2
			best = min(best, m/r*q/(1-q))
		}
	}
	return best
}

// gradBound bounds, in norm, the gradient computed in absolute values at
// any point within r of θ: by the multilinear bound, for tensor p,
// B_p = (2/n) Σ_n Π_{q≠p}(‖θ_q‖ + r)‖x_n‖·(Π_q(‖θ_q‖ + r)‖x_n‖ + ‖y_n‖)
// (the gradient of the mean square loss is (2/n)Σ(f − y)∂f). A projected
// direction's gradient subtracts a term of at most the same size, so
// counts twice. It also bounds the gradient itself.
func (d cvMultilinear) gradBound(r float64) float64 {
	all := 1.0
	for _, a := range d.norms {
		all *= a + r
	}
	var b2 float64
	for k, a := range d.norms {
		others := all / (a + r)
		var s float64
		for i, xn := range d.xn {
			s += others * xn * (all*xn + d.yn[i])
		}
		s *= 2 / float64(len(d.xn))
		if d.projected[k] {
			s *= 2
		}
		b2 += s * s
	}
	return math.Sqrt(b2)
}

// rounding bounds the norm of the gradient's rounding error at a probe
// within ε of θ: each element is off by at most γ_m times the same
// computation in absolute values (gradBound). m is the sum of the lengths
// of every chain of roundings the gradient passes through (chain), which
// bounds the longest one.
func (d cvMultilinear) rounding(eps float64, chain int, u float64) float64 {
	return cvGamma(chain, u) * d.gradBound(eps)
}

// evalError bounds the error of one evaluation of L by cvObjective at
// gonum's probes, which lie within r of θ: γ_m times the sum of its
// |terms| (at most maxL(r), all terms being squares), plus the effect of
// gonum placing a diagonal probe at θ_i − h + h rather than θ_i, two
// coordinates off by at most 2u(|θ_i| + r) each, which changes L by at
// most the gradient's norm times that.
func (d cvMultilinear) evalError(chain int, r, thetaMax float64) float64 {
	return cvGamma(chain, cvU64)*d.maxL(r) + 4*cvU64*(thetaMax+r)*d.gradBound(r)
}

// cvKinkFree draws rows of N(0, I) inputs, keeping those whose hidden
// pre-activations z = W₁x all exceed margin(x) in magnitude, so that no
// probe of the finite differences crosses a ReLU kink. Targets are one-hot.
func cvKinkFree(t *testing.T, w1 []float64, in, hidden, outs, rows int, seed uint64, margin func(x []float64) float64) (x, y []float64) {
	t.Helper()
	rng := rand.New(rand.NewPCG(seed, 0x6b696e6b)) // "kink"
	row := make([]float64, in)
	for tries := 0; len(x) < rows*in; tries++ {
		if tries > 1000*rows {
			t.Fatal("could not draw rows away from the ReLU kinks")
		}
		for j := range row {
			row[j] = rng.NormFloat64()
		}
		ok := true
		for j := range hidden {
			var z float64
			for k := range in {
				z += w1[j*in+k] * row[k]
			}
			ok = ok && math.Abs(z) > margin(row)
		}
		if ok {
			x = append(x, row...)
			c := rng.IntN(outs)
			for k := range outs {
				y = append(y, map[bool]float64{true: 1}[k == c])
			}
		}
	}
	return x, y
}

// cvNetCheck is one comparison of Sharpness with a reference spectrum.
type cvNetCheck struct {
	model optim.Model[float64]
	x, y  []float64
	rows  int
	desc  cvMultilinear
	chain int
	// ref is the reference matrix J, refErr a bound on ‖J_ref − J‖_F.
	ref    mat.Matrix
	refErr float64
}

// run compares Sharpness with the dominant eigenvalue of ref. For a
// symmetric J, Weyl's inequality moves each eigenvalue by at most ‖E‖₂ ≤
// ‖E‖_F; for a general J, a simple eigenvalue moves by at most ‖E‖₂/s
// to first order, s = |yᴴx| for its unit left and right eigenvectors
// (Wilkinson; Golub and Van Loan, Matrix Computations, §7.2.2; from
// memory). The same holds for Sharpness's own errors b per unit
// displacement (truncation plus rounding): the iteration is a power
// iteration on J plus a perturbation of norm at most b. It returns the
// estimate, the reference and the tolerance.
func (c cvNetCheck) run(t *testing.T, symmetric bool) (est optim.SharpnessEstimate, top, tol float64) {
	t.Helper()
	var vals []float64
	s := 1.0
	if symmetric {
		vals = cvSymSpectrum(t, c.ref.(mat.Symmetric))
	} else {
		var e mat.Eigen
		if !e.Factorize(c.ref, mat.EigenBoth) {
			t.Fatal("gonum Eigen failed")
		}
		cv := e.Values(nil)
		i0 := 0
		for i, v := range cv {
			if cmplx.Abs(v) > cmplx.Abs(cv[i0]) {
				i0 = i
			}
		}
		if imag(cv[i0]) != 0 {
			t.Fatalf("the dominant eigenvalue %v is not real: power iteration has no limit", cv[i0])
		}
		var vr, vl mat.CDense
		e.VectorsTo(&vr)
		e.LeftVectorsTo(&vl)
		var dot complex128
		var nr, nl float64
		for i := range len(cv) {
			dot += cmplx.Conj(vl.At(i, i0)) * vr.At(i, i0)
			nr += real(vr.At(i, i0) * cmplx.Conj(vr.At(i, i0)))
			nl += real(vl.At(i, i0) * cmplx.Conj(vl.At(i, i0)))
		}
		s = cmplx.Abs(dot) / math.Sqrt(nr*nl)
		for _, v := range cv {
			vals = append(vals, real(v))
			if imag(v) != 0 {
				vals[len(vals)-1] = cmplx.Abs(v) // only magnitudes matter below
			}
		}
		vals[i0] = real(cv[i0])
	}
	top, ratio := cvDominant(vals)
	k := cvIterations(t, ratio)
	theta := cvFlat(c.model.Params())
	eps := math.Cbrt(cvU64) * max(cvNorm(theta), 1)
	dlow := 2*eps - 2*cvU64*(cvNorm(theta)+eps*math.Sqrt(float64(len(theta))))
	trunc := c.desc.truncation(eps)
	round := 2 * c.desc.rounding(eps, c.chain, cvU64) / dlow
	b := trunc + round
	est, err := optim.Sharpness[float64](c.model, loss.Square[float64]{}, c.x, c.y, c.rows,
		optim.SharpnessSettings{Iterations: k, Tolerance: -1, WeightDecay: c.desc.lambda, Seed: 4})
	if err != nil {
		t.Fatal(err)
	}
	spread := 0.0
	for _, v := range vals {
		spread = max(spread, math.Abs(v-top))
	}
	gap := math.Abs(top) * (1 - ratio)
	p := len(theta)
	tol = (c.refErr+b)/s + spread*(b/gap)*(b/gap)/s + (2*cvGamma(p, cvU64)+3*cvU64)*math.Abs(top)
	t.Logf("dominant %.12g (s = %.3g, next/top %.3f), estimate %.12g in %d steps: |Δ| %.3g; tolerance %.3g = reference %.3g + truncation %.3g + rounding %.3g (…)/s",
		top, s, ratio, est.Value, est.Iterations, math.Abs(est.Value-top), tol, c.refErr, trunc, round)
	return est, top, tol
}

// cvReLUNet builds 3 inputs → 4 ReLU units → 2 outputs, bias-free, with
// He-normal weights from the seed.
func cvReLUNet(t *testing.T, seed uint64) *net.Network[float64] {
	t.Helper()
	nw, err := net.NewBuilder[float64](3).Dense("h", 4).ReLU("r").Readout("out", 2).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := nw.Init(net.InitSettings{Seed: seed}); err != nil {
		t.Fatal(err)
	}
	return nw
}

// Reference: gonum's diff/fd.Hessian of the objective as a function of
// the 20 flat weights of a 3–4–2 ReLU network, eigenvalues by gonum's
// EigenSym. With the ReLU pattern fixed (no row's pre-activation is
// within reach of a probe) the objective is a polynomial of degree 4 in
// the weights (f is bilinear in W₁ and W₂), so Romberg extrapolation over
// two steps removes the central formula's truncation error exactly (see
// cvRomberg) and only rounding is left: each evaluation of L is off by
// at most evalError, with m = (3+1) + (4+1) + 3 + rows·cols + P (two
// products, the loss's difference, square and scaling, its sum over
// rows·cols, and the decay's sum).
func TestSharpnessReLU(t *testing.T) {
	const rows, lambda, h = 10, 0.01, 0.02
	nw := cvReLUNet(t, 3)
	// A probe moves θ by at most 2h (fd's diagonal entries) and changes
	// z_j = w_j·x by at most 2h‖x‖; Sharpness's probes move it by far less.
	x, y := cvKinkFree(t, nw.Params()[0].Value, 3, 4, 2, rows, 1, func(x []float64) float64 { return 2 * h * cvNorm(x) })
	theta := cvFlat(nw.Params())
	desc := cvDescribe(nw, x, y, rows, lambda, false)
	f := cvObjective(nw, x, y, rows, lambda)
	deltaF := desc.evalError((3+1)+(4+1)+3+rows*2+len(theta), 2*h, cvMaxAbs(theta))
	ref, refErr := cvFDHessian(f, theta, 2, h, deltaF)
	cvSetFlat(nw.Params(), theta)
	chain := (3 + 1) + (4 + 1) + 3 + (rows + 1) + (2 + 1)
	est, top, tol := cvNetCheck{model: nw, x: x, y: y, rows: rows, desc: desc, chain: chain, ref: ref, refErr: refErr}.run(t, true)
	if math.Abs(est.Value-top) > tol {
		t.Errorf("Sharpness = %.12g, want the dominant eigenvalue of the fd Hessian, %.12g, within %.3g", est.Value, top, tol)
	}
}

// A normalize.Wrap'ed 3–4–2 ReLU network, parameters ρ₁, V₁, ρ₂, V₂ (the
// default options: a scale per layer, Multiplier hold). With the ReLU
// pattern fixed, f = ρ₂V₂Dρ₁V₁x is multilinear in the four tensors and L is
// a polynomial of degree 8 in them, so four Romberg levels make the fd
// reference exact up to rounding.
//
// Under the Multiplier hold Backward returns the directions' gradients
// projected onto the sphere's tangent space, F_V = P(V)∇_V L with
// P = I − VVᵀ/‖V‖², and the scales' plain gradients; Sharpness
// differentiates that field. The reference derivative is assembled from
// the unconstrained objective's fd Hessian H and fd gradient g:
//
//	J_ρ· = H_ρ·,   J_V· = P·H_V· + ∂P/∂V_j·g_V  (the last only for j in V),
//	∂P/∂V_j·g = −(e_j⟨V, g⟩ + V g_j)/‖V‖² + 2V_j V⟨V, g⟩/‖V‖⁴,
//
// by the product rule. Under the Projection hold Backward returns the
// unconstrained gradient, and the reference is H itself.
func TestSharpnessNormalized(t *testing.T) {
	const rows, lambda, h = 10, 0.01, 0.02
	for _, hold := range []normalize.Hold{normalize.Multiplier, normalize.Projection} {
		name := map[normalize.Hold]string{normalize.Multiplier: "multiplier", normalize.Projection: "projection"}[hold]
		t.Run(name, func(t *testing.T) {
			base := cvReLUNet(t, 3)
			w1 := append([]float64(nil), base.Params()[0].Value...)
			rho1 := cvNorm(w1)
			m, err := normalize.Wrap(base, normalize.Options{Hold: hold})
			if err != nil {
				t.Fatal(err)
			}
			// A probe moves ρ₁ and V₁ by at most r = 2h: z_j = ρ₁(V₁x)_j
			// changes by at most r|(V₁x)_j| + (ρ₁ + r)r‖x‖ ≤ r‖x‖(1 + ρ₁ + r),
			// as ‖V₁‖ = 1.
			r := 2 * h
			x, y := cvKinkFree(t, w1, 3, 4, 2, rows, 2, func(x []float64) float64 { return r * cvNorm(x) * (1 + rho1 + r) })
			theta := cvFlat(m.Params())
			desc := cvDescribe(m, x, y, rows, lambda, hold == normalize.Multiplier)
			f := cvObjective(m, x, y, rows, lambda)
			// Evaluations as in TestSharpnessReLU plus W = ρV (one
			// rounding per layer).
			deltaF := desc.evalError((3+1)+(4+1)+2+3+rows*2+len(theta), r, cvMaxAbs(theta))
			hs, hErr := cvFDHessian(f, theta, 4, h, deltaF)
			g, gErr := cvFDGradient(f, theta, 4, h, deltaF)
			cvSetFlat(m.Params(), theta)
			// Chains: as for the plain network, plus W = ρV, and the
			// scale's dot product and the projection over a direction of
			// up to 12 elements.
			chain := (3 + 1) + (4 + 1) + 3 + (rows + 1) + (2 + 1) + 1 + (12 + 4)

			var ref mat.Matrix = hs
			refErr := hErr
			p := len(theta)
			if hold == normalize.Multiplier {
				jm := mat.NewDense(p, p, nil)
				jm.Copy(hs)
				off := 0
				minV := math.Inf(1)
				for _, prm := range m.Params() {
					nv := len(prm.Value)
					if prm.Name[len(prm.Name)-2:] != ".V" {
						off += nv
						continue
					}
					v := theta[off : off+nv]
					gv := g[off : off+nv]
					ss := cvNorm(v) * cvNorm(v)
					minV = min(minV, math.Sqrt(ss))
					var vg float64
					for i := range v {
						vg += v[i] * gv[i]
					}
					for col := range p {
						var vh float64 // ⟨V, H_{V,col}⟩
						for i := range v {
							vh += v[i] * hs.At(off+i, col)
						}
						for i := range v {
							val := hs.At(off+i, col) - v[i]*vh/ss
							if col >= off && col < off+nv {
								j := col - off
								dp := 2 * v[j] * v[i] * vg / (ss * ss)
								if i == j {
									dp -= vg / ss
								}
								dp -= v[i] * gv[j] / ss
								val += dp
							}
							jm.Set(off+i, col, val)
						}
					}
					off += nv
				}
				ref = jm
				// ‖P‖ ≤ 1 carries H's error over; g's error enters
				// through ∂P/∂V_j, of norm at most 4/‖V‖ per column.
				refErr = hErr + 4*math.Sqrt(float64(p))*gErr/minV
			}

			before := append([]float64(nil), theta...)
			est, top, tol := cvNetCheck{model: m, x: x, y: y, rows: rows, desc: desc, chain: chain, ref: ref, refErr: refErr}.run(t, hold == normalize.Projection)
			if math.Abs(est.Value-top) > tol {
				t.Errorf("Sharpness = %.12g, want the dominant eigenvalue of the reference, %.12g, within %.3g", est.Value, top, tol)
			}
			if after := cvFlat(m.Params()); !sameBits([][]float64{before}, [][]float64{after}) {
				t.Error("Sharpness changed the wrapped network's parameters")
			}
			if hold == normalize.Multiplier {
				// The field differs from the unconstrained gradient: the
				// check must be able to tell their curvatures apart.
				free, _ := cvDominant(cvSymSpectrum(t, hs))
				t.Logf("the unconstrained Hessian's dominant eigenvalue is %.6g", free)
				if math.Abs(free-top) < 10*tol {
					t.Errorf("the projected and unconstrained curvatures (%.6g, %.6g) are within 10 tolerances: the check would not tell them apart", top, free)
				}
			}
		})
	}
}

// cvBits returns the bits of every Value and Grad of the model's
// parameters and of its base network's.
func cvBits[T net.Float](m optim.Model[T]) []uint64 {
	var out []uint64
	add := func(v []T) {
		for _, e := range v {
			out = append(out, math.Float64bits(float64(e)))
		}
	}
	for _, ps := range [][]*net.Param[T]{m.Params(), m.Base().Params()} {
		for _, p := range ps {
			add(p.Value)
			add(p.Grad)
		}
	}
	return out
}

func cvRestores[T net.Float](t *testing.T) {
	const rows = 16
	set := randomSet(21, rows, 3, 2) // invented: restoration holds for any data
	x, y := make([]T, len(set.X)), make([]T, len(set.Y))
	for i, v := range set.X {
		x[i] = T(v)
	}
	for i, v := range set.Y {
		y[i] = T(v)
	}
	build := func() *net.Network[T] {
		nw, err := net.NewBuilder[T](3).ConstantFeature("one").Dense("h", 5).ReLU("r").Readout("out", 2).Build()
		if err != nil {
			t.Fatal(err)
		}
		if err := nw.Init(net.InitSettings{Seed: 8}); err != nil {
			t.Fatal(err)
		}
		return nw
	}
	plain := build()
	wrapped, err := normalize.Wrap(build(), normalize.Options{})
	if err != nil {
		t.Fatal(err)
	}
	for name, m := range map[string]optim.Model[T]{"plain": plain, "normalized": wrapped} {
		// Leave gradients of an earlier pass in place, as the trainer does.
		out := m.Forward(x, rows)
		g := make([]T, len(out))
		loss.Square[T]{}.Eval(out, y, rows, 2, g)
		m.Backward(g)
		before := cvBits(m)
		est, err := optim.Sharpness[T](m, loss.Square[T]{}, x, y, rows, optim.SharpnessSettings{WeightDecay: 1e-3})
		if err != nil {
			t.Fatal(err)
		}
		if !(est.Value != 0) || est.Iterations < 1 {
			t.Errorf("%s: estimate %+v, want a nonzero value after at least one step", name, est)
		}
		if after := cvBits(m); !slices.Equal(before, after) {
			t.Errorf("%s: Sharpness did not restore the parameters' bits", name)
		}
		// On error too: a NaN target makes the loss NaN at the first probe.
		bad := append([]T(nil), y...)
		bad[3] = T(math.NaN())
		_, err = optim.Sharpness[T](m, loss.Square[T]{}, x, bad, rows, optim.SharpnessSettings{})
		var se *optim.SharpnessError
		if !errors.As(err, &se) || se.What != "loss" || se.Iteration != 1 {
			t.Errorf("%s: NaN target gave error %v, want a *SharpnessError for the loss at iteration 1", name, err)
		}
		if after := cvBits(m); !slices.Equal(before, after) {
			t.Errorf("%s: Sharpness did not restore the parameters' bits after an error", name)
		}
	}
}

// Every Value and Grad, of the trainable parameters and of the base
// network's weights, holds its bits after Sharpness returns, with or
// without an error (a property for any data).
func TestSharpnessRestores(t *testing.T) {
	t.Run("float64", cvRestores[float64])
	t.Run("float32", cvRestores[float32])
}

// The early stop and its report (properties of the iteration, for any
// data): with the default tolerance on a well-separated spectrum (next
// eigenvalue 0.33 of the top) the estimate converges within the default
// 20 steps; a tolerance of 1e-18 is not met in 7 steps, after which the
// estimate still moves by about 0.33^14 ≈ 2e-7 of itself, and all steps
// run; the same seed gives the same bits; settings out of range are
// errors.
func TestSharpnessConvergence(t *testing.T) {
	const n, d = 40, 4
	x, y := cvLinearData(n, d, 1, 1)
	nw, err := net.NewBuilder[float64](d).ConstantFeature("one").Readout("out", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := nw.Init(net.InitSettings{Seed: 5}); err != nil {
		t.Fatal(err)
	}
	l := loss.Square[float64]{}
	e1, err := optim.Sharpness[float64](nw, l, x, y, n, optim.SharpnessSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if !e1.Converged || e1.Iterations >= 20 {
		t.Errorf("default settings: %+v, want convergence before 20 steps", e1)
	}
	e2, err := optim.Sharpness[float64](nw, l, x, y, n, optim.SharpnessSettings{})
	if err != nil {
		t.Fatal(err)
	}
	if math.Float64bits(e1.Value) != math.Float64bits(e2.Value) || e1.Iterations != e2.Iterations {
		t.Errorf("the same seed gave %+v and %+v", e1, e2)
	}
	e3, err := optim.Sharpness[float64](nw, l, x, y, n, optim.SharpnessSettings{Iterations: 7, Tolerance: 1e-18})
	if err != nil {
		t.Fatal(err)
	}
	if e3.Converged || e3.Iterations != 7 {
		t.Errorf("unreachable tolerance: %+v, want 7 steps, not converged", e3)
	}
	for _, s := range []optim.SharpnessSettings{
		{Iterations: -1}, {Tolerance: math.NaN()}, {WeightDecay: -1}, {Step: -1e-3}, {Step: 1},
	} {
		if _, err := optim.Sharpness[float64](nw, l, x, y, n, s); err == nil {
			t.Errorf("settings %+v: no error", s)
		}
	}
}

// cvMap returns the trainer's step on a direction of curvature h as the
// linear map of (θ, v) derived in StableRate's documentation: plain
// gradient descent is the heavy ball with μ = 0.
func cvMap(h, eta, mu float64, nesterov bool) *mat.Dense {
	if nesterov {
		return mat.NewDense(2, 2, []float64{1 - eta*(1+mu)*h, -eta * mu * mu, h, mu})
	}
	return mat.NewDense(2, 2, []float64{1 - eta*h, -eta * mu, h, mu})
}

// cvRadius returns the spectral radius of a from gonum's Eigen.
func cvRadius(t *testing.T, a *mat.Dense) float64 {
	t.Helper()
	var e mat.Eigen
	if !e.Factorize(a, mat.EigenNone) {
		t.Fatal("gonum Eigen failed")
	}
	var r float64
	for _, v := range e.Values(nil) {
		r = max(r, cmplx.Abs(v))
	}
	return r
}

var cvRules = []struct {
	name     string
	mu       float64
	nesterov bool
}{
	{"gd", 0, false},
	{"heavy-ball-0.5", 0.5, false},
	{"heavy-ball-0.9", 0.9, false},
	{"nesterov-0.5", 0.5, true},
	{"nesterov-0.9", 0.9, true},
	{"nesterov-0.99", 0.99, true},
}

// The thresholds against gonum: the spectral radius of the step's 2×2
// map, from mat.Eigen, stays below 1 for every η on a grid up to
// (1 − 1e-6)·StableRate and exceeds 1 at (1 + 1e-6)·StableRate. Near the
// threshold the radius moves linearly in η (the root crosses −1 with
// nonzero speed, from the Jury conditions), by about 1e-6·ηh here, far
// above the ~1e-15 error of the computed eigenvalues.
func TestStableRateSpectralRadius(t *testing.T) {
	for _, h := range []float64{0.3, 1, 7.5} {
		for _, r := range cvRules {
			eta := optim.StableRate(h, r.mu, r.nesterov)
			for i := 1; i <= 200; i++ {
				e := eta * (1 - 1e-6) * float64(i) / 200
				if rad := cvRadius(t, cvMap(h, e, r.mu, r.nesterov)); rad >= 1 {
					t.Errorf("%s, h = %v: spectral radius %.9g ≥ 1 at η = %.6g below StableRate %.6g", r.name, h, rad, e, eta)
					break
				}
			}
			if rad := cvRadius(t, cvMap(h, eta*(1+1e-6), r.mu, r.nesterov)); rad <= 1 {
				t.Errorf("%s, h = %v: spectral radius %.9g ≤ 1 just above StableRate %.6g", r.name, h, rad, eta)
			}
		}
	}
	// Closed forms (common practice, no source): 2/h for gradient descent
	// and 2(1 + μ)/h for the heavy ball; Nesterov's derived form.
	if got := optim.StableRate(4, 0, false); got != 0.5 {
		t.Errorf("StableRate(4, 0) = %v, want 2/h = 0.5", got)
	}
	if got := optim.StableRate(4, 0.5, false); got != 0.75 {
		t.Errorf("StableRate(4, 0.5) = %v, want 2(1 + μ)/h = 0.75", got)
	}
	if got, want := optim.StableRate(4, 0.5, true), 2*1.5/(2*4.0); got != want {
		t.Errorf("StableRate(4, 0.5, Nesterov) = %v, want 2(1 + μ)/((1 + 2μ)h) = %v", got, want)
	}
	if !math.IsInf(optim.StableRate(0, 0.9, true), 1) || !math.IsInf(optim.StableRate(-2, 0, false), 1) || !math.IsNaN(optim.StableRate(math.NaN(), 0, false)) {
		t.Error("StableRate: want +Inf for sharpness ≤ 0 and NaN for NaN")
	}
}

// cvPowers returns ‖A^k‖_F for k = 0..K (gonum's mat.Norm(·, 2) of a
// matrix is the Frobenius norm, an upper bound on the spectral norm) and
// A^K, by gonum.
func cvPowers(a *mat.Dense, k int) ([]float64, *mat.Dense) {
	norms := []float64{1}
	p := mat.NewDense(2, 2, []float64{1, 0, 0, 1})
	for range k {
		var q mat.Dense
		q.Mul(p, a)
		p = &q
		norms = append(norms, mat.Norm(p, 2))
	}
	return norms, p
}

// The trainer's own recursion on a 1-D quadratic, just below and just
// above StableRate: the real Trainer on one row x = 0.5 with target 0 and
// one weight, loss (x·w)² = h w²/2 with h = 2x² = 0.5 exactly (as in
// TestLangevinQuadratic), full batch, no noise. Its iterates must follow
// the 2×2 map M of StableRate's derivation, w_K = (M^K)₀₀·w₀, computed by
// gonum; the map decays below the threshold and grows above it.
//
// Rounding: a step computes x·w, 2·(x·w)·x, the decay-free g, μv + g,
// g + μv and θ − ηg, about 8 roundings of quantities at most
// c = 1 + ‖M‖_F times the state's norm, so it adds an error of at most
// 8u·c‖s_k‖ ≤ 8u·c‖M^k‖|w₀|, which later steps carry by ‖M^(K−1−k)‖.
// Summed: |w_K − (M^K)₀₀w₀| ≤ 8u·c·Σ_k ‖M^(K−1−k)‖‖M^k‖·|w₀|, to first order.
func TestStableRateTrainerQuadratic(t *testing.T) {
	const x, w0, delta = 0.5, 1.0, 0.01
	h := 2 * x * x
	set := &data.Set[float64]{X: []float64{x}, Y: []float64{0}, Rows: 1, Features: 1, Outputs: 1}
	for _, r := range cvRules {
		for _, side := range []float64{-1, 1} {
			eta := optim.StableRate(h, r.mu, r.nesterov) * (1 + side*delta)
			m := cvMap(h, eta, r.mu, r.nesterov)
			// Steps enough for the map to shrink below 1e-6 or grow past
			// 1e6, from its spectral radius.
			rad := cvRadius(t, m)
			k := int(math.Ceil(math.Log(1e6)/math.Abs(math.Log(rad)))) + 50
			norms, mk := cvPowers(m, k)
			want := mk.At(0, 0) * w0
			var acc float64
			for j := range k {
				acc += norms[k-1-j] * norms[j]
			}
			tol := 8 * cvU64 * (1 + mat.Norm(m, 2)) * acc * math.Abs(w0)

			nw, err := net.NewBuilder[float64](1).Readout("w", 1).Build()
			if err != nil {
				t.Fatal(err)
			}
			nw.Params()[0].Value[0] = w0
			tr, err := optim.NewTrainer[float64](nw, loss.Square[float64]{}, set,
				optim.Settings{LearningRate: eta, Momentum: r.mu, Nesterov: r.nesterov, Epochs: k})
			if err != nil {
				t.Fatal(err)
			}
			if _, err := tr.Run(context.Background()); err != nil {
				t.Fatalf("%s at %.2f× StableRate: %v", r.name, 1+side*delta, err)
			}
			got := nw.Params()[0].Value[0]
			t.Logf("%s at %.2f×: radius %.6f, %d steps, w_K = %.6g, (M^K)₀₀w₀ = %.6g, tolerance %.2g", r.name, 1+side*delta, rad, k, got, want, tol)
			if math.Abs(got-want) > tol {
				t.Errorf("%s at %.2f× StableRate: w after %d steps = %.17g, want (M^K)₀₀w₀ = %.17g within %.3g", r.name, 1+side*delta, k, got, want, tol)
			}
			if side < 0 && !(math.Abs(want) < 1e-5*w0) || side > 0 && !(math.Abs(want) > 1e5*w0) {
				t.Errorf("%s at %.2f× StableRate: the map gives %.3g after %d steps; want decay below the threshold and growth above", r.name, 1+side*delta, want, k)
			}
		}
	}
}

// Least squares with weight decay (ridge; REFERENCES.md, Hoerl and
// Kennard 1970), trained by the real Trainer at 0.9× and 1.1× the
// StableRate of the exact λ_max of its Hessian 2(XᵀX/n + λI) (gonum
// EigenSym). The error w − w* (w* from gonum's Cholesky) evolves along
// each eigenvector of the Hessian by the 2×2 map of that eigenvalue, from
// zero velocity, so after K steps it is at most max_i ‖M_i^K‖₂·‖w₀ − w*‖
// in norm, and its component along the top eigenvector is exactly
// (M_top^K)₀₀ times the initial one. K is chosen from gonum's matrix
// powers so that the first is below 1e-9 at 0.9× and the second above 1e9
// at 1.1×; the test asks for 1e-6 and 1e6, leaving three orders of
// magnitude for rounding, which TestLeastSquaresMinimumNorm bounds near
// 1e-14 relative per step.
func TestStableRateLeastSquares(t *testing.T) {
	const n, d, lambda = 40, 4, 0.05
	x, y, set := cfProblem(n, d, 12)
	xm := mat.NewDense(n, d, x)
	var a mat.SymDense
	a.SymOuterK(1/float64(n), xm.T())
	for i := range d {
		a.SetSym(i, i, a.At(i, i)+lambda)
	}
	var b mat.VecDense
	b.MulVec(xm.T(), mat.NewVecDense(n, y))
	b.ScaleVec(1/float64(n), &b)
	var ch mat.Cholesky
	if !ch.Factorize(&a) {
		t.Fatal("gonum Cholesky failed on a positive definite matrix")
	}
	var wstar mat.VecDense
	if err := ch.SolveVecTo(&wstar, &b); err != nil {
		t.Fatal(err)
	}
	var es mat.EigenSym
	if !es.Factorize(&a, true) {
		t.Fatal("gonum EigenSym failed")
	}
	hs := es.Values(nil)
	for i := range hs {
		hs[i] *= 2 // Hessian 2(XᵀX/n + λI)
	}
	var vecs mat.Dense
	es.VectorsTo(&vecs)
	top := hs[d-1]
	// The initial error w₀ − w* = −w* (w₀ = 0) and its top component.
	cTop := 0.0
	for i := range d {
		cTop -= vecs.At(i, d-1) * wstar.AtVec(i)
	}
	e0 := mat.Norm(&wstar, 2)
	if math.Abs(cTop) < 1e-3*e0 {
		t.Fatalf("the seeded problem's start has almost no top component (%.3g of %.3g)", cTop, e0)
	}
	for _, r := range cvRules[:5] {
		for _, factor := range []float64{0.9, 1.1} {
			eta := factor * optim.StableRate(top, r.mu, r.nesterov)
			const kmax = 20000
			k := 0
			if factor < 1 {
				worst := make([]float64, kmax+1)
				for _, hi := range hs {
					norms, _ := cvPowers(cvMap(hi, eta, r.mu, r.nesterov), kmax)
					for j, v := range norms {
						worst[j] = max(worst[j], v)
					}
				}
				for k < kmax && worst[k] >= 1e-9 {
					k++
				}
			} else {
				m := cvMap(top, eta, r.mu, r.nesterov)
				mk := mat.NewDense(2, 2, []float64{1, 0, 0, 1})
				for k < kmax && math.Abs(mk.At(0, 0)*cTop) <= 1e9*e0 {
					mk.Mul(mk, m)
					k++
				}
			}
			if k == kmax {
				t.Fatalf("%s at %.1f×: no step count up to %d reaches the target of the exact recursion", r.name, factor, kmax)
			}
			nw := cfReadout(t, d)
			tr, err := optim.NewTrainer[float64](nw, loss.Square[float64]{}, set,
				optim.Settings{LearningRate: eta, Momentum: r.mu, Nesterov: r.nesterov, WeightDecay: lambda, Epochs: k})
			if err != nil {
				t.Fatal(err)
			}
			res, err := tr.Run(context.Background())
			var nf *optim.NonFiniteError
			diverged := errors.As(err, &nf)
			if err != nil && !diverged {
				t.Fatal(err)
			}
			dist := cfDist(nw.Params()[0].Value, &wstar)
			t.Logf("%s at %.1f× StableRate(%.4g) = %.4g: %d epochs, status %v, ‖w − w*‖/‖w*‖ = %.3g", r.name, factor, top, eta, k, res.Status, dist/e0)
			switch {
			case factor < 1 && (diverged || dist > 1e-6*e0):
				t.Errorf("%s at 0.9× StableRate: ‖w − w*‖ = %.3g after %d epochs (error %v), want below 1e-6·‖w*‖", r.name, dist, k, err)
			case factor > 1 && !diverged && !(dist > 1e6*e0):
				t.Errorf("%s at 1.1× StableRate: ‖w − w*‖ = %.3g after %d epochs, want divergence (above 1e6·‖w*‖ or a NonFiniteError)", r.name, dist, k)
			}
		}
	}
}
