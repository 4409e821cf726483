package optim_test

// Closed-form checks of the trainer: gradient descent on least squares and
// ridge regression against solutions computed by gonum, and Langevin
// sampling against the stationary laws of the Euler–Maruyama chain and of
// the continuous dynamics.
//
// Every network here is a single readout, f(x) = x·wᵀ, so that the trainer's
// update is a known map of w: whatever goes wrong is the trainer's doing
// (step size, gradient scale, decay, noise scale), not the network's.

import (
	"context"
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"
	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// cfEps is the float64 unit round-off, 2⁻⁵³.
const cfEps = 0x1p-53

// cfReadout builds f(x) = x·wᵀ with d inputs and one output; w starts at 0.
func cfReadout(t *testing.T, d int) *net.Network[float64] {
	t.Helper()
	nw, err := net.NewBuilder[float64](d).Readout("w", 1).Build()
	if err != nil {
		t.Fatal(err)
	}
	return nw
}

// cfRun trains nw on set with s and fails the test unless the run finishes.
func cfRun(t *testing.T, nw *net.Network[float64], l loss.Func[float64], set *data.Set[float64], s optim.Settings) {
	t.Helper()
	tr, err := optim.NewTrainer[float64](nw, l, set, s)
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	if err != nil || res.Status != optim.Finished {
		t.Fatalf("run ended with status %v, error %v", res.Status, err)
	}
	if res.Steps != s.Epochs {
		t.Fatalf("full-batch run took %d steps in %d epochs, want one step per epoch", res.Steps, s.Epochs)
	}
}

// cfProblem draws an n×d design X and targets y, all N(0, 1), from a seeded
// PCG, and returns them with the data set holding them.
func cfProblem(n, d int, seed uint64) (x, y []float64, set *data.Set[float64]) {
	rng := rand.New(rand.NewPCG(seed, 0x636c6f73)) // "clos"
	x = make([]float64, n*d)
	y = make([]float64, n)
	for i := range x {
		x[i] = rng.NormFloat64()
	}
	for i := range y {
		y[i] = rng.NormFloat64()
	}
	return x, y, &data.Set[float64]{X: x, Y: y, Rows: n, Features: d, Outputs: 1}
}

// cfDist returns ‖a − b‖₂.
func cfDist(a []float64, b *mat.VecDense) float64 {
	var s float64
	for i, v := range a {
		e := v - b.AtVec(i)
		s += e * e
	}
	return math.Sqrt(s)
}

// Closed form (REFERENCES.md, "Least squares, underdetermined"): for n < d
// and X of full row rank, gradient descent on (1/n)‖Xw − y‖² from w₀ = 0
// converges to the minimum-norm interpolant w* = X⁺y, because every
// gradient (2/n)Xᵀ(Xw − y) lies in the row space of X and so does every
// iterate, and the one interpolant in the row space is X⁺y. X⁺y is computed
// here by gonum's thin SVD (mat.SVD.SolveVecTo, the minimum-norm least
// squares solution).
//
// With X = U·diag(s)·Vᵀ (thin) the Hessian is H = 2XᵀX/n, with eigenvalues
// 2s_i²/n on the row space, and since Hw* = (2/n)Xᵀy every iterate obeys
// exactly
//
//	w_k − w* = (I − ηH)^k (w₀ − w*) = −V·diag((1 − 2ηs_i²/n)^k)·Vᵀw*.
//
// The test checks this transient at an early epoch, which pins the product
// of the step size and the gradient's scale, and the limit after enough
// epochs.
func TestLeastSquaresMinimumNorm(t *testing.T) {
	const n, d = 6, 15
	x, y, set := cfProblem(n, d, 1)
	xm := mat.NewDense(n, d, x)
	var svd mat.SVD
	if !svd.Factorize(xm, mat.SVDThin) {
		t.Fatal("gonum SVD failed")
	}
	s := svd.Values(nil)
	if r := svd.Rank(1e-10); r != n {
		t.Fatalf("the seeded X has rank %d, want full row rank %d", r, n)
	}
	var want mat.VecDense
	svd.SolveVecTo(&want, mat.NewVecDense(n, y), n)
	var v mat.Dense
	svd.VTo(&v) // d×n, the right singular vectors as columns
	norm := mat.Norm(&want, 2)

	// Step size from the spectrum: L_max = 2s_max²/n, and η = 0.9/L_max
	// keeps every factor 1 − 2ηs_i²/n in [0, 1). The slowest is the one of
	// s_min, so ‖w_k − w*‖ ≤ q^k‖w*‖ with q = 1 − 2ηs_min²/n.
	lmax := 2 * s[0] * s[0] / n
	eta := 0.9 / lmax
	q := 1 - 2*eta*s[n-1]*s[n-1]/n
	// Enough epochs for q^k ≤ 1e-10: the contraction part of the tolerance
	// is then 1e-10·‖w*‖, far below any error a wrong gradient scale or
	// step would leave (half the gradient leaves about q^(k/2) ≈ 1e-5).
	epochs := int(math.Ceil(math.Log(1e-10) / math.Log(q)))
	if epochs > 100000 {
		t.Fatalf("the seeded X is too ill-conditioned (q = %v) for a quick test", q)
	}
	t.Logf("s = %.4g, η = %.4g, q = %.6f, epochs = %d, ‖w*‖ = %.4g", s, eta, q, epochs, norm)

	// Round-off (Higham, Accuracy and Stability of Numerical Algorithms,
	// §3.1, from memory: a length-m dot product has relative error ≤ mε
	// in the sum of |terms|). Each step's computed gradient carries an
	// error of about (n+d)ε·(2/n)·s_max·(s_max‖w‖ + ‖y‖), i.e. after the
	// factor η, about (n+d)ε(‖w*‖ + ‖y‖/s_max). In the row space such
	// errors are damped by q per step and add up to at most 1/(1 − q)
	// times one step's; in the null space of X nothing damps them, so
	// they can add up over the k steps, at most kε‖w*‖ from rounding the
	// update w − ηg (taken twice for the two roundings per element). This
	// bound is near 1e-14 here, a thousand times below the contraction
	// part.
	roundoff := func(k int) float64 {
		return float64(n+d)*cfEps*(norm+mat.Norm(mat.NewVecDense(n, y), 2)/s[0])/(1-q) + 2*float64(k)*cfEps*norm
	}

	// Transient at k₁ epochs, before convergence: the exact iterate is
	// V·diag(1 − (1 − 2ηs_i²/n)^k₁)·Vᵀw*. Only round-off separates the
	// trainer from it.
	k1 := 20
	var c mat.VecDense
	c.MulVec(v.T(), &want) // Vᵀw*
	for i := range n {
		c.SetVec(i, c.AtVec(i)*(1-math.Pow(1-2*eta*s[i]*s[i]/n, float64(k1))))
	}
	var wk mat.VecDense
	wk.MulVec(&v, &c)
	nw := cfReadout(t, d)
	cfRun(t, nw, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, Epochs: k1})
	err, tol := cfDist(nw.Params()[0].Value, &wk), roundoff(k1)
	t.Logf("after %d epochs ‖w − w_k‖ = %.3g, round-off bound %.3g", k1, err, tol)
	if err > tol {
		t.Errorf("after %d epochs ‖w − w_k‖ = %.3g, want ≤ %.3g (the closed-form GD iterate)", k1, err, tol)
	}

	nw = cfReadout(t, d)
	cfRun(t, nw, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, Epochs: epochs})
	err = cfDist(nw.Params()[0].Value, &want)
	tol = math.Pow(q, float64(epochs))*norm + roundoff(epochs)
	t.Logf("‖w − X⁺y‖ = %.3g, tolerance %.3g", err, tol)
	if err > tol {
		t.Errorf("‖w − X⁺y‖ = %.3g after %d epochs, want ≤ q^k‖w*‖ + round-off = %.3g", err, epochs, tol)
	}
}

// Closed form (REFERENCES.md; Hoerl and Kennard 1970, ridge regression):
// with weight decay λ the objective (1/n)‖Xw − y‖² + λ‖w‖² is strongly
// convex, with Hessian H = 2(XᵀX/n + λI), and its one minimizer is
// w* = (XᵀX/n + λI)⁻¹Xᵀy/n, solved here by gonum's Cholesky factorization.
// The same holds for n < d (where the decay alone makes it unique) and
// n > d.
//
// With H's eigenvalues in [μ, L], μ = 2(s_min²/n + λ) (s_min = 0 when
// n < d), L = 2(s_max²/n + λ), and η = 0.9/L, the error contracts by at
// least q = 1 − ημ per step: ‖w_k − w*‖ ≤ q^k‖w*‖ from w₀ = 0.
func TestRidgeWeightDecay(t *testing.T) {
	for _, tc := range []struct {
		name   string
		n, d   int
		lambda float64
	}{
		{"n<d", 6, 15, 0.3},
		{"n>d", 40, 8, 0.05},
	} {
		t.Run(tc.name, func(t *testing.T) {
			n, d := tc.n, tc.d
			x, y, set := cfProblem(n, d, 2)
			xm := mat.NewDense(n, d, x)
			var a mat.SymDense
			a.SymOuterK(1/float64(n), xm.T()) // XᵀX/n
			for i := range d {
				a.SetSym(i, i, a.At(i, i)+tc.lambda)
			}
			var b mat.VecDense
			b.MulVec(xm.T(), mat.NewVecDense(n, y))
			b.ScaleVec(1/float64(n), &b)
			var ch mat.Cholesky
			if !ch.Factorize(&a) {
				t.Fatal("gonum Cholesky failed on a matrix that is positive definite by construction")
			}
			var want mat.VecDense
			if err := ch.SolveVecTo(&want, &b); err != nil {
				t.Fatal(err)
			}
			norm := mat.Norm(&want, 2)

			var svd mat.SVD
			if !svd.Factorize(xm, mat.SVDNone) {
				t.Fatal("gonum SVD failed")
			}
			s := svd.Values(nil)
			smin := 0.0
			if n >= d {
				smin = s[d-1]
			}
			L := 2 * (s[0]*s[0]/float64(n) + tc.lambda)
			mu := 2 * (smin*smin/float64(n) + tc.lambda)
			eta := 0.9 / L
			q := 1 - eta*mu
			// q^k ≤ 1e-10, as in TestLeastSquaresMinimumNorm.
			epochs := int(math.Ceil(math.Log(1e-10) / math.Log(q)))
			if epochs > 100000 {
				t.Fatalf("the seeded problem is too ill-conditioned (q = %v) for a quick test", q)
			}
			nw := cfReadout(t, d)
			cfRun(t, nw, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, WeightDecay: tc.lambda, Epochs: epochs})
			err := cfDist(nw.Params()[0].Value, &want)
			// Round-off as in TestLeastSquaresMinimumNorm, without the
			// null-space drift: the decay damps every direction by q.
			roundoff := float64(n+d) * cfEps * (norm + mat.Norm(mat.NewVecDense(n, y), 2)/s[0]) / (1 - q)
			tol := math.Pow(q, float64(epochs))*norm + roundoff
			t.Logf("η = %.4g, q = %.6f, epochs = %d, ‖w*‖ = %.4g, ‖w − w*‖ = %.3g, tolerance %.3g", eta, q, epochs, norm, err, tol)
			if err > tol {
				t.Errorf("‖w − w*‖ = %.3g after %d epochs, want ≤ q^k‖w*‖ + round-off = %.3g", err, epochs, tol)
			}
			// The decay must matter: the ridge solution is far from the
			// undecayed least-squares one (a check that a trainer
			// ignoring λ would fail by more than the tolerance).
			var ls mat.VecDense
			var full mat.SVD
			full.Factorize(xm, mat.SVDThin)
			full.SolveVecTo(&ls, mat.NewVecDense(n, y), min(n, d))
			if gap := cfDist(nw.Params()[0].Value, &ls); gap < 1e3*tol {
				t.Errorf("the ridge solution is only %.3g from the λ = 0 solution; the test would not see a missing decay", gap)
			}
		})
	}
}

// cfBatchMeans returns the mean of z and its standard error by the method
// of batch means: z is split into nb contiguous batches, and the standard
// error is the standard deviation of the batch means over √nb (Flegal and
// Jones, "Batch means and spectral variance estimators in Markov chain Monte
// Carlo", Ann. Statist. 2010, from memory). Batches much longer than the
// chain's autocorrelation time have nearly independent, nearly normal
// means, so (mean − truth)/SE is close to Student's t with nb − 1 degrees
// of freedom.
func cfBatchMeans(z []float64, nb int) (mean, se float64) {
	m := len(z) / nb
	bm := make([]float64, nb)
	for b := range nb {
		var s float64
		for _, v := range z[b*m : (b+1)*m] {
			s += v
		}
		bm[b] = s / float64(m)
	}
	return cfMeanSE(bm)
}

// cfMeanSE returns the mean of the batch means bm and its standard error,
// sd(bm)/√len(bm).
func cfMeanSE(bm []float64) (mean, se float64) {
	nb := float64(len(bm))
	for _, v := range bm {
		mean += v
	}
	mean /= nb
	var ss float64
	for _, v := range bm {
		ss += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(ss/(nb-1)) / math.Sqrt(nb)
}

// cfNSE is the width, in batch-means standard errors, of every statistical
// check below. With 50 batches, (estimate − truth)/SE is close to Student's
// t with 49 degrees of freedom, for which P(|t| > 5) = 7.7e-6 two-sided
// (gonum stat/distuv.StudentsT; the normal value is 5.7e-7): with about
// twenty such checks in this file, a correct trainer fails one with
// probability near 2e-4 whatever the seed, so the seeds are not tuned to
// pass. Narrower bands would make that chance real (3 SE: 0.4% per
// check), wider ones would blunt the resolution checks.
const (
	cfNSE     = 5
	cfBatches = 50
)

// cfSample runs a one-weight model for burn+keep full-batch steps and
// calls visit with the index (from 0) and the weight after each of the
// last keep steps, read in the Step hook, which the trainer calls after
// the update.
func cfSample(t *testing.T, nw *net.Network[float64], l loss.Func[float64], set *data.Set[float64], s optim.Settings, burn, keep int, visit func(i int, w float64)) {
	t.Helper()
	w := nw.Params()[0]
	seen := 0
	s.Epochs = burn + keep
	s.Hooks = &optim.Hooks{Step: func(info *optim.StepInfo) error {
		if info.Step > burn {
			visit(seen, float64(w.Value[0]))
			seen++
		}
		return nil
	}}
	cfRun(t, nw, l, set, s)
	if seen != keep {
		t.Fatalf("visited %d samples, want %d", seen, keep)
	}
}

// Closed form (REFERENCES.md; Ornstein–Uhlenbeck, Gardiner, Handbook of
// Stochastic Methods): on L(w) = k w²/2 the trainer's Langevin step is the
// Euler–Maruyama step
//
//	w' = a·w + σξ,  a = 1 − ηk,  σ² = 2ηT,  ξ ~ N(0, 1),
//
// an AR(1) recursion. With |a| < 1 its stationary law is normal with mean 0
// and variance v solving v = a²v + σ², so
//
//	v = 2ηT / (1 − (1 − ηk)²) = 2ηT / (ηk(2 − ηk)) = T / (k(1 − ηk/2)),
//
// exactly, for every η; the continuous dynamics' T/k is its η → 0 limit.
//
// The loss is realized with the square loss on one row x = √(k/2) with
// target 0 and one weight: (x·w − 0)² = k w²/2, gradient k·w.
func TestLangevinQuadratic(t *testing.T) {
	if testing.Short() {
		t.Skip("long Markov chain; runs without -short")
	}
	// ηk = 0.1; x = √(k/2) = 0.5 is exact, so x² = k/2 holds exactly and
	// the gradient's factor x² is not hidden behind x = 1.
	const k, eta, temp = 0.5, 0.2, 0.7
	x := math.Sqrt(k / 2)
	set := &data.Set[float64]{X: []float64{x}, Y: []float64{0}, Rows: 1, Features: 1, Outputs: 1}

	// The exact recursion, once, without noise: one step from w₀ gives
	// w₀(1 − ηk). The trainer computes x·w₀, 2(x·w₀)·x (exact: x is a
	// power of two), η·that and w₀ minus it, and the reference rounds ηk,
	// 1 − ηk and the product: a handful of roundings, each ≤ ε relative,
	// on terms no larger than |w₀|, so 8ε|w₀| bounds the difference. A
	// wrong gradient scale or step would be off by a fraction of ηk|w₀|,
	// some fourteen orders of magnitude more.
	nw := cfReadout(t, 1)
	const w0 = 0.8125
	nw.Params()[0].Value[0] = w0
	cfRun(t, nw, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, Epochs: 1})
	if got, want := nw.Params()[0].Value[0], w0*(1-eta*k); math.Abs(got-want) > 8*cfEps*w0 {
		t.Errorf("one noiseless step from %v: w = %.17g, want w₀(1 − ηk) = %.17g", w0, got, want)
	}

	// The chain. Its autocorrelation at lag j is a^j, so its integrated
	// autocorrelation time is (1 + a)/(1 − a) = 19 steps, and a burn-in of
	// 2000 steps (a^2000 ≈ 1e-92) forgets the start w = 0. Batches of
	// 30,000 steps are 1600 autocorrelation times long, so their means
	// are nearly independent. 1.5e6 steps take well under a second.
	const burn, keep = 2000, 1_500_000
	nw = cfReadout(t, 1)
	w := make([]float64, keep)
	cfSample(t, nw, loss.Square[float64]{}, set, optim.Settings{LearningRate: eta, Temperature: temp, Seed: 7}, burn, keep,
		func(i int, v float64) { w[i] = v })

	mean, seMean := cfBatchMeans(w, cfBatches)
	sq := make([]float64, len(w))
	for i, v := range w {
		sq[i] = (v - mean) * (v - mean)
	}
	v, seVar := cfBatchMeans(sq, cfBatches)
	want := temp / (k * (1 - eta*k/2))
	t.Logf("mean %.4g ± %.2g; variance %.5g ± %.2g, Euler–Maruyama %.5g, continuous T/k %.5g", mean, seMean, v, seVar, want, temp/k)
	if math.Abs(mean) > cfNSE*seMean {
		t.Errorf("stationary mean %.4g, want 0 within %d SE = %.3g", mean, cfNSE, cfNSE*seMean)
	}
	if math.Abs(v-want) > cfNSE*seVar {
		t.Errorf("stationary variance %.5g, want T/(k(1 − ηk/2)) = %.5g within %d SE = %.3g", v, want, cfNSE, cfNSE*seVar)
	}
	// Resolution: the check must tell the exact discrete variance from the
	// continuous T/k, 5% apart, else it could not see a noise of the
	// wrong scale by a few percent either.
	if gap := want - temp/k; cfNSE*seVar > gap/2 {
		t.Errorf("%d SE = %.3g is not below half the Euler–Maruyama shift %.3g: the chain is too short to resolve it", cfNSE, cfNSE*seVar, gap)
	}
}

// cfWell is the double-well potential U(o) = h(o² − 1)² as a loss on one
// output, for tests only: Eval returns the mean of U over the rows and
// writes U′(o)/rows = 4h·o(o² − 1)/rows into grad, following loss.Func.
// The targets are ignored.
type cfWell struct{ h float64 }

var _ loss.Func[float64] = cfWell{}

func (cfWell) Name() string { return "test-double-well" }

func (c cfWell) Eval(out, _ []float64, rows, cols int, grad []float64) float64 {
	var sum float64
	for i, o := range out[:rows*cols] {
		u := o*o - 1
		sum += c.h * u * u
		if grad != nil {
			grad[i] = 4 * c.h * o * u / float64(rows)
		}
	}
	return sum / float64(rows)
}

// Closed form (REFERENCES.md; Gibbs–Boltzmann, Gardiner, Handbook of
// Stochastic Methods): the stationary density of dw = −U′(w)dt + √(2T)dB
// is ρ(w) = exp(−U(w)/T)/Z. The double well U = h(w² − 1)² with h = 1 and
// T = 0.5 has a barrier of 2T at w = 0, which the chain crosses often: at
// Kramers' rate √(U″(±1)|U″(0)|)/(2π)·e^{−h/T} = √32/(2π)·e^{−2} ≈ 0.12
// per unit time (from memory), about two thousand times in the run below,
// so the occupation of each well is well sampled. The loss is the test
// type cfWell on a one-weight readout with input 1, so the output is w.
//
// Discretization bias. The trainer samples the Euler–Maruyama chain, whose
// stationary density is ρ_η = ρ(1 + η f₁) + O(η²) with
//
//	f₁ = U′²/(4T) − U″/2 + E_ρ[U″]/4.
//
// Derivation (derived here, by the expansion method of Talay and Tubaro,
// Stoch. Anal. Appl. 1990; citation from memory): for a test function φ, E[φ(w′)|w] = φ + η𝓛φ +
// η²C₂φ + O(η³) with 𝓛φ = −U′φ′ + Tφ″ and, from the moments of
// w′ − w = −ηU′ + √(2ηT)ξ, C₂φ = ½U′²φ″ − TU′φ‴ + ½T²φ⁗. Stationarity of
// ρ_η, with ∫(𝓛φ)ρ = 0, leaves ∫(𝓛φ)f₁ρ = −∫(C₂φ)ρ at order η².
// Integrating by parts against ρ (ρ′ = −(U′/T)ρ) turns the left side into
// −T∫φ′f₁′ρ and the right into −∫φ′·(½U′U″ − ½TU‴)ρ, so
// f₁′ = U′U″/(2T) − U‴/2; the constant makes ∫ρf₁ = 0, using
// E_ρ[U′²] = T·E_ρ[U″]. Check: for U = kw²/2 this gives
// ρ_η ∝ ρ·(1 + ηk²w²/(4T)), the first order in η of the exact
// N(0, T/(k(1 − ηk/2))) of TestLangevinQuadratic.
//
// Each bin's probability under the chain is therefore the Gibbs one plus
// η∫_b ρf₁ + O(η²). The allowance is A_b = 2η∫_b ρ|f₁|: it covers the
// first-order term twice over, whatever its sign, leaving the other half
// for the O(η²) remainder, whose size relative to the first-order term is
// of order η|f₁|, checked below to be at most 0.25 on the whole histogram
// range. The allowances are also checked to add up to a small share of
// the probability, so that the Gibbs law is what is tested.
func TestDoubleWellGibbs(t *testing.T) {
	if testing.Short() {
		t.Skip("long Markov chain; runs without -short")
	}
	const h, temp, eta = 1.0, 0.5, 0.002
	U := func(w float64) float64 { u := w*w - 1; return h * u * u }
	dU := func(w float64) float64 { return 4 * h * w * (w*w - 1) }
	d2U := func(w float64) float64 { return 4 * h * (3*w*w - 1) }

	// Bins of width 0.2 on [−1.8, 1.8]; outside, U/T > 10 and the Gibbs
	// mass is about 2e-6. Each integral is a 32-point Gauss–Legendre rule
	// on an entire function over an interval of 0.2 (or the tails to ±3,
	// beyond which U/T > 128), exact to round-off for these purposes.
	const lo, hi, nbin = -1.8, 1.8, 18
	width := (hi - lo) / nbin
	edge := func(b int) float64 { return lo + float64(b)*width }
	integ := func(f func(float64) float64, a, b float64) float64 {
		return quad.Fixed(f, a, b, 32, quad.Legendre{}, 0)
	}
	// gibbs returns the bin probabilities at temperature tt, the mass
	// outside the bins, and Z.
	gibbs := func(tt float64) (p []float64, outside, z float64) {
		bz := func(w float64) float64 { return math.Exp(-U(w) / tt) }
		outside = integ(bz, -3, lo) + integ(bz, hi, 3)
		z = outside
		p = make([]float64, nbin)
		for b := range p {
			p[b] = integ(bz, edge(b), edge(b+1))
			z += p[b]
		}
		for b := range p {
			p[b] /= z
		}
		return p, outside / z, z
	}
	want, wantOut, z := gibbs(temp)
	rho := func(w float64) float64 { return math.Exp(-U(w)/temp) / z }
	meanU2 := integ(func(w float64) float64 { return d2U(w) * rho(w) }, -3, 3) // E_ρ[U″]
	f1 := func(w float64) float64 { g := dU(w); return g*g/(4*temp) - d2U(w)/2 + meanU2/4 }

	allow := make([]float64, nbin)
	bias := make([]float64, nbin)
	maxF1, sumAllow := 0.0, 0.0
	for b := range nbin {
		allow[b] = 2 * eta * integ(func(w float64) float64 { return math.Abs(f1(w)) * rho(w) }, edge(b), edge(b+1))
		bias[b] = eta * integ(func(w float64) float64 { return f1(w) * rho(w) }, edge(b), edge(b+1))
		sumAllow += allow[b]
		for i := range 21 {
			maxF1 = math.Max(maxF1, math.Abs(f1(edge(b)+float64(i)*width/20)))
		}
	}
	t.Logf("E_ρ[U″] = %.4g, η·max|f₁| = %.3g, bias allowances total %.3g, Gibbs mass outside %.2g", meanU2, eta*maxF1, sumAllow, wantOut)
	if eta*maxF1 > 0.25 {
		t.Fatalf("η·max|f₁| = %.3g: η is too large for the first-order bias expansion", eta*maxF1)
	}
	// A few percent at most: then a wrong law shows, as the control at
	// the end confirms.
	if sumAllow > 0.05 {
		t.Fatalf("the bias allowances add up to %.3g of the probability; lower η", sumAllow)
	}

	// The chain, from w = 1. The slowest relaxation is between the wells,
	// about 1/(2·0.12) ≈ 4 time units = 2000 steps; the burn-in is 25 of
	// those. 8e6 steps are 16,000 time units, about 2000 crossings, in 50
	// batches of 320 time units, 80 relaxation times each. They take about
	// two seconds.
	const burn, keep = 50_000, 8_000_000
	per := keep / cfBatches
	counts := make([][]float64, nbin) // counts[b][batch]
	for b := range counts {
		counts[b] = make([]float64, cfBatches)
	}
	sums := make([]float64, cfBatches)
	outside := 0
	set := &data.Set[float64]{X: []float64{1}, Y: []float64{0}, Rows: 1, Features: 1, Outputs: 1}
	nw := cfReadout(t, 1)
	nw.Params()[0].Value[0] = 1
	cfSample(t, nw, cfWell{h: h}, set, optim.Settings{LearningRate: eta, Temperature: temp, Seed: 11}, burn, keep,
		func(i int, w float64) {
			k := i / per
			sums[k] += w
			b := int(math.Floor((w - lo) / width))
			if b < 0 || b >= nbin {
				outside++
				return
			}
			counts[b][k]++
		})

	for k := range sums {
		sums[k] /= float64(per)
	}
	mean, seMean := cfMeanSE(sums)
	t.Logf("mean %.4g ± %.2g, fraction outside the bins %.2g", mean, seMean, float64(outside)/keep)
	if math.Abs(mean) > cfNSE*seMean {
		t.Errorf("mean %.4g, want 0 (the potential is even) within %d SE = %.3g", mean, cfNSE, cfNSE*seMean)
	}
	// Outside the bins the Gibbs mass is about 2e-6, and the bias there
	// raises it by a factor of order 1 + η|f₁|, at most a few. 1e-4 is
	// fifty times the Gibbs mass: with some 15 to 40 samples expected out
	// there, 800 cannot come from a correct chain, while a noise or step
	// that fattens the tails shows.
	if frac := float64(outside) / keep; frac > 1e-4 {
		t.Errorf("fraction of samples outside [%v, %v] = %.3g, want about %.2g (at most 1e-4)", lo, hi, frac, wantOut)
	}
	got := make([]float64, nbin)
	se := make([]float64, nbin)
	for b := range nbin {
		for k := range counts[b] {
			counts[b][k] /= float64(per)
		}
		got[b], se[b] = cfMeanSE(counts[b])
		t.Logf("bin [%+.1f, %+.1f): chain %.5f ± %.5f, Gibbs %.5f, first-order bias %+.5f, allowance %.5f",
			edge(b), edge(b+1), got[b], se[b], want[b], bias[b], allow[b])
		if d := math.Abs(got[b] - want[b]); d > cfNSE*se[b]+allow[b] {
			t.Errorf("bin [%+.1f, %+.1f): chain %.5f, Gibbs %.5f; |difference| %.3g > %d SE + bias allowance = %.3g",
				edge(b), edge(b+1), got[b], want[b], d, cfNSE, cfNSE*se[b]+allow[b])
		}
	}

	// Control: the same histogram must fail against the Gibbs law at a
	// temperature 20% off, which is what a noise scale 10% off would give
	// (T enters only as σ² = 2ηT); otherwise the check could not see it.
	wrong, _, _ := gibbs(1.2 * temp)
	worst := 0.0 // the largest |difference|/(5 SE + allowance) against 1.2T
	for b := range nbin {
		worst = math.Max(worst, math.Abs(got[b]-wrong[b])/(cfNSE*se[b]+allow[b]))
	}
	t.Logf("control at 1.2T: largest difference %.3g times the acceptance band", worst)
	if worst <= 1 {
		t.Errorf("the histogram also passes against the Gibbs law at 1.2T: the check cannot see a wrong noise scale")
	}
}
