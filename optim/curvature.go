package optim

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
)

// SharpnessSettings configures Sharpness. The zero value runs at most 20
// power-iteration steps, stops early once the estimate changes by less than
// 1e-3 of itself, includes no weight decay, draws the start vector from
// seed 0 and takes the finite-difference step derived in Sharpness's
// documentation.
type SharpnessSettings struct {
	// Iterations is the most power-iteration steps, each costing two
	// forward and two backward passes; zero means 20.
	Iterations int
	// Tolerance ends the iteration early once two consecutive estimates
	// differ by at most Tolerance times the latest one in magnitude. Zero
	// means 1e-3; a negative value runs all Iterations.
	Tolerance float64
	// WeightDecay λ adds λ‖θ‖² for every parameter with Decay set, as
	// Settings.WeightDecay does in training: 2λ on those coordinates of the
	// Hessian.
	WeightDecay float64
	// Seed selects the random start vector; the same seed gives the same
	// bits.
	Seed uint64
	// Step is the finite-difference step relative to max(‖θ‖₂, 1); zero
	// means the cube root of the unit round-off of the model's float type,
	// u^(1/3): about 4.8e-6 for float64 and 3.9e-3 for float32.
	Step float64
}

// SharpnessEstimate is what Sharpness returns.
type SharpnessEstimate struct {
	// Value is the estimated dominant eigenvalue: the eigenvalue of
	// largest magnitude, with its sign.
	Value float64
	// Iterations is the number of power-iteration steps taken (Hessian-
	// vector products computed).
	Iterations int
	// Converged reports whether the estimate met the tolerance before the
	// iterations ran out.
	Converged bool
}

// SharpnessError reports a loss or gradient that is NaN or infinite at one
// of the points Sharpness probes. The model's parameters are restored
// before it is returned.
type SharpnessError struct {
	Iteration int    // the power-iteration step, from 1
	What      string // "loss", or "gradient of <param>"
	Index     int    // position in the parameter; -1 for the loss
	Value     float64
}

func (e *SharpnessError) Error() string {
	where := ""
	if e.Index >= 0 {
		where = fmt.Sprintf(" at index %d", e.Index)
	}
	return fmt.Sprintf("optim: sharpness: iteration %d: %s is %v%s at a probe point near the weights; the weights are unchanged. Check that the weights are finite and the inputs standardized",
		e.Iteration, e.What, e.Value, where)
}

// Sharpness estimates the dominant eigenvalue of the Hessian of the
// training objective on one batch,
//
//	L(θ) = l.Eval(m.Forward(x, rows), y) + λ Σ_{p.Decay} ‖θ_p‖²,
//
// with respect to the concatenation θ of m.Params(), in the order Params
// returns them. x holds rows input rows and y the matching target rows,
// as for the trainer; the data term is the loss's mean over the rows, so
// the estimate is on the scale the trainer's learning rate sees, whatever
// the batch size. The dominant eigenvalue is the largest curvature of L
// along any direction, the "sharpness" of the objective; StableRate turns
// it into the largest stable learning rate.
//
// # Method
//
// Power iteration (v ← Hv/‖Hv‖) with Hessian-vector products that never
// form H, the idea of Pearlmutter ("Fast exact multiplication by the
// Hessian", Neural Computation 6(1), 1994); here the product comes from
// central differences of the gradient the model's Backward returns,
//
//	Hv ≈ (∇L(θ + εv) − ∇L(θ − εv)) / (2ε),
//
// except for the weight decay's exact 2λ, which is added as such. The
// estimate is the Rayleigh quotient dᵀHd/dᵀd, where d is the displacement
// actually applied: θ ± εv is rounded to the model's float type, and using
// the rounded displacement keeps that rounding out of the estimate (the
// quotient is exact for whatever direction d is). The next direction is
// Hd/‖Hd‖.
//
// The step ε is s·max(‖θ‖₂, 1) with s = SharpnessSettings.Step, by
// default u^(1/3) for the unit round-off u of T (2⁻⁵³ or 2⁻²⁴). The
// choice balances the two errors of the difference quotient for a unit v:
// truncation, ε²‖∇³g‖/6 where ∇³g is the third derivative of the gradient
// g = ∇L (the even terms of the Taylor series cancel in a central
// difference), and rounding, about u‖g‖/ε from the gradient's own
// rounding errors divided by 2ε. Their sum is smallest for ε of order
// (u‖g‖/‖∇³g‖)^(1/3). For a bias-free network every derivative scales with
// the size of the weights (the k-th derivative of the gradient with
// respect to a layer scales as that layer's norm to the power −k, times
// the gradient), so ε proportional to ‖θ‖ makes both errors relative
// ones of order u^(2/3): about 2e-11 in float64 and 1.5e-5 in float32,
// times the conditioning of the gradient's sums (the summation length in
// float32's worst case). The floor 1 keeps ε from vanishing with θ: near
// θ = 0 the gradient's terms do not shrink with θ while ε would, and the
// rounding error u‖g‖/ε would grow without bound; a network's third
// derivatives do not grow as its weights shrink, so the truncation error
// stays of order u^(2/3) there too.
//
// # What it estimates, and how well
//
// The estimate is the eigenvalue of largest magnitude, with its sign. At
// or near a minimum the Hessian is positive semi-definite and that is
// λ_max; away from one (early in training, at a saddle) the dominant
// eigenvalue can be negative, and then the largest positive eigenvalue is
// at most its magnitude: pass |Value| to StableRate. When a positive and
// a negative eigenvalue have nearly the same magnitude the estimate
// settles slowly if at all, and Converged may stay false.
//
// For a symmetric H the Rayleigh quotient lies between the extreme
// eigenvalues, so a positive estimate approaches λ_max from below: with
// too few iterations it underestimates the sharpness and overestimates the
// stable rate. Its error after k steps falls as (λ₂/λ₁)^(2k), λ₂ being the
// eigenvalue next in magnitude. When λ₂ is close to λ₁ that is slow, but
// the eigenvectors not yet separated then have eigenvalues close to λ₁:
// whatever the spectrum, after k steps from a random start the relative
// error is of order ln(P)/k with high probability, P the number of
// parameters (Kuczyński and Woźniakowski, SIAM J. Matrix Anal. Appl.
// 13(4), 1992; from memory). The early stop judges convergence from the
// change between steps, which near the limit is the error times
// (1 − (λ₂/λ₁)²): with a small gap the stop can come while the error is
// still several times Tolerance. Choose a learning rate a clear factor
// below StableRate.
//
// Each step costs two forward and two backward passes over the batch;
// the default 20 steps cost as much as 40 training steps on the batch.
// Sharpness allocates its buffers, a few vectors the size of θ, once per
// call.
//
// # What the model's gradient is
//
// The Hessian is that of the gradient field m.Backward returns. For a
// plain network, and for a normalize.Net with the Projection hold, that is
// the gradient of L, and the estimate is the Hessian's. For a
// normalize.Net with the (default) Multiplier hold, Backward returns the
// directions' gradients projected onto the sphere's tangent space, which
// is what the trainer follows; the estimate is then the dominant
// eigenvalue of the derivative of that projected field. On tangent
// directions that derivative is the Riemannian Hessian of L on the
// sphere (the ambient Hessian projected onto the tangent space, minus
// ⟨∇_V L, V⟩/‖V‖² times the identity there), and its component along V
// is zero at a point where the projected gradient vanishes, so near such
// points it is the curvature the trainer's steps feel. It is not the
// Hessian of the unconstrained L in (ρ, V), which also curves along V,
// where the trainer never moves, and can be quite different (a test
// finds 43 against 54 on a small network).
// Sharpness never calls the model's Constrain: the probes leave the
// sphere by ε, as the definition of a derivative requires.
//
// ReLU networks are only piecewise smooth; a probe crosses a kink only for
// rows whose pre-activations are within about ε·‖x‖ of zero, and such rows
// then contribute the average of the two pieces' curvatures.
//
// # Side effects
//
// On return, also on error or panic, every Value and Grad of m.Params()
// and of m.Base().Params() holds exactly the bits it held on entry. The
// network's activation buffers are overwritten, as by any Forward.
// Sharpness panics if rows < 1 or x or y is too short for rows rows.
func Sharpness[T net.Float](m Model[T], l loss.Func[T], x, y []T, rows int, s SharpnessSettings) (SharpnessEstimate, error) {
	if err := s.validate(); err != nil {
		return SharpnessEstimate{}, err
	}
	iters, tol := s.Iterations, s.Tolerance
	if iters == 0 {
		iters = 20
	}
	if tol == 0 {
		tol = 1e-3
	}
	base := m.Base()
	cols := base.Out()
	if rows < 1 {
		panic(fmt.Sprintf("optim: Sharpness: rows = %d, want at least 1", rows))
	}
	if len(x) < rows*base.In() || len(y) < rows*cols {
		panic(fmt.Sprintf("optim: Sharpness: %d inputs and %d targets cannot hold %d rows of %d features and %d outputs", len(x), len(y), rows, base.In(), cols))
	}
	params := m.Params()
	n := 0
	for _, p := range params {
		n += len(p.Value)
	}
	if n == 0 {
		return SharpnessEstimate{}, errors.New("optim: Sharpness: the model has no parameters")
	}

	// Every tensor whose bits must survive: the trainable ones and the
	// base network's own (a wrapper writes its W from its parameters).
	keep := append([]*net.Param[T](nil), params...)
	for _, p := range base.Params() {
		seen := false
		for _, q := range keep {
			seen = seen || q == p
		}
		if !seen {
			keep = append(keep, p)
		}
	}
	saved := 0
	for _, p := range keep {
		saved += len(p.Value) + len(p.Grad)
	}
	// One allocation of each kind per call.
	store := make([]T, saved+rows*cols)
	gout := store[saved:]
	buf := make([]float64, 4*n)
	theta, v, disp, w := buf[:n], buf[n:2*n], buf[2*n:3*n], buf[3*n:]

	off := 0
	for _, p := range keep {
		off += copy(store[off:], p.Value)
		off += copy(store[off:], p.Grad)
	}
	defer func() {
		off := 0
		for _, p := range keep {
			off += copy(p.Value, store[off:off+len(p.Value)])
			off += copy(p.Grad, store[off:off+len(p.Grad)])
		}
		Resync(m)
	}()

	off = 0
	for _, p := range params {
		for j, t := range p.Value {
			theta[off+j] = float64(t)
		}
		off += len(p.Value)
	}
	norm := l2(theta)
	if math.IsNaN(norm) || math.IsInf(norm, 0) {
		return SharpnessEstimate{}, errors.New("optim: Sharpness: the weights are not all finite")
	}
	step := s.Step
	if step == 0 {
		step = math.Cbrt(unitRoundoff[T]())
	}
	eps := step * max(norm, 1)

	rng := rand.New(rand.NewPCG(s.Seed, 0x6375727665)) // "curve"
	for i := range v {
		v[i] = rng.NormFloat64()
	}
	scaleTo(v, 1/l2(v))

	decay2 := 2 * s.WeightDecay
	// grad sets the parameters to θ + sign·ε·v (rounded to T), runs the
	// model and adds sign·(gradient) into w; with sign +1 it also records
	// the displacement's upper end in disp, with −1 subtracts the lower.
	grad := func(it int, sign float64) error {
		off := 0
		for _, p := range params {
			for j := range p.Value {
				t := T(theta[off+j] + sign*eps*v[off+j])
				p.Value[j] = t
				if sign > 0 {
					disp[off+j] = float64(t)
				} else {
					disp[off+j] -= float64(t)
				}
			}
			off += len(p.Value)
		}
		Resync(m)
		out := m.Forward(x, rows)
		if lv := l.Eval(out, y, rows, cols, gout); math.IsNaN(lv) || math.IsInf(lv, 0) {
			return &SharpnessError{Iteration: it, What: "loss", Index: -1, Value: lv}
		}
		m.Backward(gout)
		off = 0
		for _, p := range params {
			for j, g := range p.Grad[:len(p.Value)] {
				if notFinite(g) {
					return &SharpnessError{Iteration: it, What: "gradient of " + p.Name, Index: j, Value: float64(g)}
				}
				if sign > 0 {
					w[off+j] = float64(g)
				} else {
					w[off+j] -= float64(g)
				}
			}
			off += len(p.Value)
		}
		return nil
	}

	var est SharpnessEstimate
	prev := math.NaN()
	for it := 1; it <= iters; it++ {
		if err := grad(it, 1); err != nil {
			return SharpnessEstimate{}, err
		}
		if err := grad(it, -1); err != nil {
			return SharpnessEstimate{}, err
		}
		// w ≈ H·disp from the data term; the decay's Hessian is exactly
		// 2λ on the decayed coordinates.
		if decay2 != 0 {
			off := 0
			for _, p := range params {
				if p.Decay {
					for j := range p.Value {
						w[off+j] += decay2 * disp[off+j]
					}
				}
				off += len(p.Value)
			}
		}
		var dw, dd float64
		for i, d := range disp {
			dw += d * w[i]
			dd += d * d
		}
		est.Iterations = it
		if dd == 0 {
			// ε·v vanished in rounding: θ is far too large for the step.
			return SharpnessEstimate{}, fmt.Errorf("optim: Sharpness: the step %.3g is lost in rounding next to weights of norm %.3g; raise SharpnessSettings.Step", eps, norm)
		}
		est.Value = dw / dd
		wn := l2(w)
		if wn == 0 {
			// H·d = 0 for a random direction d: the Hessian is zero
			// (almost surely), and so is its dominant eigenvalue.
			est.Value, est.Converged = 0, true
			return est, nil
		}
		if tol > 0 && it > 1 && math.Abs(est.Value-prev) <= tol*math.Abs(est.Value) {
			est.Converged = true
			return est, nil
		}
		prev = est.Value
		for i, wi := range w {
			v[i] = wi / wn
		}
	}
	return est, nil
}

func (s SharpnessSettings) validate() error {
	bad := func(field string, v any, want string) error {
		return fmt.Errorf("optim: SharpnessSettings.%s = %v; %s", field, v, want)
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case s.Iterations < 0:
		return bad("Iterations", s.Iterations, "want a positive number of steps (0 means 20)")
	case !finite(s.Tolerance):
		return bad("Tolerance", s.Tolerance, "want a finite relative tolerance (0 means 1e-3, negative runs every step)")
	case !(s.WeightDecay >= 0) || !finite(s.WeightDecay):
		return bad("WeightDecay", s.WeightDecay, "want λ ≥ 0")
	case !(s.Step >= 0) || !(s.Step < 1):
		return bad("Step", s.Step, "want a relative step in (0, 1), or 0 for the default")
	}
	return nil
}

// unitRoundoff returns u = 2⁻⁵³ for float64 and 2⁻²⁴ for float32.
func unitRoundoff[T net.Float]() float64 {
	if _, ok := any(T(0)).(float32); ok {
		return 0x1p-24
	}
	return 0x1p-53
}

// l2 returns ‖a‖₂, scaled against overflow.
func l2(a []float64) float64 {
	var big float64
	for _, v := range a {
		big = max(big, math.Abs(v))
	}
	if big == 0 || math.IsInf(big, 0) || math.IsNaN(big) {
		return big
	}
	var s float64
	for _, v := range a {
		r := v / big
		s += r * r
	}
	return big * math.Sqrt(s)
}

func scaleTo(a []float64, c float64) {
	for i := range a {
		a[i] *= c
	}
}

// StableRate returns the largest learning rate at which the trainer's
// update, without noise, is stable on a quadratic whose curvature along
// some direction is sharpness (h below): for every η below it the error
// along that direction decays geometrically, above it it grows. With h
// the largest eigenvalue of the Hessian (Sharpness), it is the largest
// stable learning rate for the whole quadratic.
//
// With the trainer's rules (see the package documentation), on a
// direction of curvature h the gradient is g = hθ and, writing one step
// as a linear map of (θ, v):
//
//   - plain gradient descent (momentum 0): θ ← (1 − ηh)θ, stable iff
//     |1 − ηh| < 1, that is η < 2/h (classical; "Gradient Descent on Neural
//     Networks Typically Occurs at the Edge of Stability", Cohen et al.,
//     ICLR 2021, observes full-batch training hovering at this threshold).
//   - heavy ball, v ← μv + g, θ ← θ − ηv: the map is
//     [[1 − ηh, −ημ], [h, μ]], with characteristic polynomial
//     z² − (1 + μ − ηh)z + μ. By the Schur–Cohn (Jury) conditions for
//     z² + a₁z + a₀ — |a₀| < 1, 1 + a₁ + a₀ > 0, 1 − a₁ + a₀ > 0 — both
//     roots lie inside the unit circle iff μ < 1, ηh > 0 and
//     2(1 + μ) − ηh > 0: η < 2(1 + μ)/h.
//   - Nesterov as the trainer writes it, v ← μv + g, θ ← θ − η(g + μv):
//     θ ← θ − η(1 + μ)hθ − ημ²v, the map is [[1 − η(1 + μ)h, −ημ²], [h, μ]],
//     with trace (1 + μ)(1 − ηh) and determinant μ(1 − ηh). Jury's
//     conditions: 1 + a₁ + a₀ = ηh > 0; 1 − a₁ + a₀ = 1 + (1 + 2μ)(1 − ηh)
//     > 0, that is ηh < 2(1 + μ)/(1 + 2μ); and |μ(1 − ηh)| < 1, which
//     then holds for 0 ≤ μ < 1. So η < 2(1 + μ)/((1 + 2μ)h): 2/h at μ = 0,
//     falling towards 4/(3h) as μ → 1.
//
// Weight decay is part of the curvature (2λ on decayed coordinates);
// Sharpness includes it when given the same λ. Temperature adds noise but
// does not move the threshold of the mean's recursion.
//
// A sharpness ≤ 0 has no threshold: along a direction of non-positive
// curvature the iterates do not oscillate into divergence at any η (they
// drift, at h < 0, whatever η is), and StableRate returns +Inf. When
// Sharpness reports a negative dominant eigenvalue pass its magnitude,
// which bounds every positive eigenvalue. A NaN sharpness gives NaN.
// StableRate panics unless 0 ≤ momentum < 1, the range Settings accepts.
func StableRate(sharpness, momentum float64, nesterov bool) float64 {
	if !(momentum >= 0 && momentum < 1) {
		panic(fmt.Sprintf("optim: StableRate: momentum %v, want 0 ≤ μ < 1", momentum))
	}
	switch {
	case math.IsNaN(sharpness):
		return math.NaN()
	case sharpness <= 0:
		return math.Inf(1)
	case nesterov:
		return 2 * (1 + momentum) / ((1 + 2*momentum) * sharpness)
	default:
		return 2 * (1 + momentum) / sharpness
	}
}
