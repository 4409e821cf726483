package gauge_test

// Claim 4 of the square-loss theory (theory; common practice: the
// literature on the square-loss dynamics cited in claims_test.go, which
// models SGD noise as Langevin dynamics, from memory): between an isolated
// minimum and an equally deep but degenerate one, the stationary mass in
// the degenerate minimum grows with the dimension. Checked against the
// exact Boltzmann–Gibbs masses of a constructed potential, computed by
// gonum quadrature, in 1, 2 and 5 dimensions, and against long Langevin
// runs of optim's trainer, the way optim/closedform_test.go checks its
// one-dimensional chains.

import (
	"context"
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/loss"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// valley is a potential on w = (w₁, u₂, …, u_d) with two minima of equal
// depth 0:
//
//	U(w) = h(w₁² − 1)² + Σ_{i≥2} q(u_i; s(w₁)),
//	q(u; s) = (1 − s)(k/2)u² + s·c·(|u| − b)₊⁴,
//
// where s rises from 0 for w₁ ≤ −a to 1 for w₁ ≥ a along the septic
// smoothstep S(t) = 35t⁴ − 84t⁵ + 70t⁶ − 20t⁷, t = (w₁ + a)/(2a), whose
// first three derivatives vanish at both ends. Since U ≥ h(w₁² − 1)² ≥ 0,
// U = 0 exactly at w₁ = ±1 with every q = 0:
//
//   - at w₁ = −1 (s = 0), q = (k/2)u² vanishes only at u = 0: an isolated
//     minimum, quadratic in all d directions (Hessian diag(8h, k, …, k));
//   - at w₁ = +1 (s = 1), q = c(|u| − b)₊⁴ vanishes on all of |u| ≤ b: a
//     degenerate minimum, flat in d − 1 directions over the cube [−b, b]^(d−1)
//     and walled by quartics outside it.
//
// U is three times continuously differentiable (the quartic wall and S are
// C³), which the discretization allowance below needs. The mass "in" a
// minimum is that of its side of the barrier: w₁ < 0 for the isolated one,
// w₁ > 0 for the degenerate one (h(w₁² − 1)² is even, and for d = 1 the two
// sides are mirror images, so each holds exactly 1/2).
type valley struct{ h, k, c, b, a, temp float64 }

// step returns s(w₁) and its first two derivatives.
func (p valley) step(w1 float64) (s, ds, d2s float64) {
	t := (w1 + p.a) / (2 * p.a)
	if t <= 0 {
		return 0, 0, 0
	}
	if t >= 1 {
		return 1, 0, 0
	}
	w := 2 * p.a
	t2, u := t*t, 1-t
	return t2 * t2 * (35 - 84*t + 70*t2 - 20*t2*t), 140 * t2 * t * u * u * u / w, 420 * t2 * u * u * (1 - 2*t) / (w * w)
}

// wall returns (|u| − b)₊.
func (p valley) wall(u float64) float64 { return math.Max(0, math.Abs(u)-p.b) }

func (p valley) q(u, s float64) float64 {
	v := p.wall(u)
	return (1-s)*p.k/2*u*u + s*p.c*v*v*v*v
}

// The per-coordinate pieces of U's derivatives, at one u and s:
// g = ∂q/∂s (so ∂U/∂w₁ = D′ + s′Σg_i), dq = ∂q/∂u and d2q = ∂²q/∂u².
func (p valley) g(u float64) float64 { v := p.wall(u); return p.c*v*v*v*v - p.k/2*u*u }
func (p valley) dq(u, s float64) float64 {
	v := p.wall(u)
	return (1-s)*p.k*u + s*4*p.c*v*v*v*math.Copysign(1, u)
}
func (p valley) d2q(u, s float64) float64 { v := p.wall(u); return (1-s)*p.k + 12*s*p.c*v*v }

// eval returns U(w) and writes ∇U into grad.
func (p valley) eval(w, grad []float64) float64 {
	s, ds, _ := p.step(w[0])
	e := w[0]*w[0] - 1
	u := p.h * e * e
	g1 := 4 * p.h * w[0] * e
	for i := 1; i < len(w); i++ {
		u += p.q(w[i], s)
		g1 += ds * p.g(w[i])
		grad[i] = p.dq(w[i], s)
	}
	grad[0] = g1
	return u
}

// valleyLoss is the potential as a loss on the d outputs of one row, for
// tests only: with a readout of d units on the single input 1 the outputs
// are the weights, so the trainer's Langevin step is the Euler–Maruyama
// step on U. Eval follows loss.Func: the mean of U over the rows, and
// ∇U/rows in grad. The targets are ignored.
type valleyLoss struct {
	p    valley
	grad []float64 // scratch, one row
}

var _ loss.Func[float64] = (*valleyLoss)(nil)

func (*valleyLoss) Name() string { return "test-valley" }

func (l *valleyLoss) Eval(out, _ []float64, rows, cols int, grad []float64) float64 {
	var sum float64
	for r := range rows {
		sum += l.p.eval(out[r*cols:(r+1)*cols], l.grad)
		if grad != nil {
			for j, g := range l.grad {
				grad[r*cols+j] = g / float64(rows)
			}
		}
	}
	return sum / float64(rows)
}

// gaussLegendre integrates f over [lo, hi] with an n-point Gauss–Legendre
// rule (gonum integrate/quad).
func gaussLegendre(f func(float64) float64, lo, hi float64, n int) float64 {
	return quad.Fixed(f, lo, hi, n, quad.Legendre{}, 0)
}

// perp returns ∫ φ(u) e^{−q(u; s)/T} du over the real line for an even
// integrand (every φ used is even in u), as twice the integral over u ≥ 0
// in pieces on which q is a polynomial, [0, b] and [b, b + 8]; beyond
// b + 8, q/T ≥ min((k/2)(b + 8)², c·8⁴)/T = 136 for every s in [0, 1]
// (q is linear in s), so the tail is below e^{−136}.
func (p valley) perp(s float64, n int, phi func(u float64) float64) float64 {
	f := func(u float64) float64 { return phi(u) * math.Exp(-p.q(u, s)/p.temp) }
	return 2 * (gaussLegendre(f, 0, p.b, n) + gaussLegendre(f, p.b, p.b+1, n) + gaussLegendre(f, p.b+1, p.b+3, n) + gaussLegendre(f, p.b+3, p.b+8, n))
}

// overW1 integrates f(w₁)·e^{−h(w₁²−1)²/T}·G(s(w₁))^(d−1) over lo < w₁ < hi,
// in pieces split where s or U's shape changes (±a, ±1) and cut at ±4,
// where h(w₁²−1)²/T = 225.
func (p valley) overW1(d int, lo, hi float64, n int, f func(w1 float64, m *valleyMoments) float64) float64 {
	cuts := []float64{-4, -1, -p.a, 0, p.a, 1, 4}
	g := func(w1 float64) float64 {
		s, _, _ := p.step(w1)
		m := p.moments(s, n)
		e := w1*w1 - 1
		return math.Exp(-p.h*e*e/p.temp) * math.Pow(m.G, float64(d-1)) * f(w1, &m)
	}
	var sum float64
	for j := 0; j+1 < len(cuts); j++ {
		a, b := math.Max(lo, cuts[j]), math.Min(hi, cuts[j+1])
		if b > a {
			sum += gaussLegendre(g, a, b, n)
		}
	}
	return sum
}

// valleyMoments are expectations over one perpendicular coordinate u with
// density π_s(u) = e^{−q(u; s)/T}/G(s), at one s: of g, its powers, of
// r = dq²/(4T) − d2q/2, and of products.
type valleyMoments struct {
	s, G                 float64
	g1, g2, g3, g4, absG float64 // E g, E g², E g³, E g⁴, E|g|
	r1, r2, gr, g2r, dq2 float64 // E r, E r², E g·r, E g²·r, E dq²
	d2q                  float64 // E d2q
}

func (p valley) moments(s float64, n int) valleyMoments {
	m := valleyMoments{s: s, G: p.perp(s, n, func(float64) float64 { return 1 })}
	e := func(phi func(u float64) float64) float64 { return p.perp(s, n, phi) / m.G }
	r := func(u float64) float64 { d := p.dq(u, s); return d*d/(4*p.temp) - p.d2q(u, s)/2 }
	m.g1 = e(p.g)
	m.g2 = e(func(u float64) float64 { x := p.g(u); return x * x })
	m.g3 = e(func(u float64) float64 { x := p.g(u); return x * x * x })
	m.g4 = e(func(u float64) float64 { x := p.g(u); return x * x * x * x })
	m.absG = e(func(u float64) float64 { return math.Abs(p.g(u)) })
	m.r1 = e(r)
	m.r2 = e(func(u float64) float64 { x := r(u); return x * x })
	m.gr = e(func(u float64) float64 { return p.g(u) * r(u) })
	m.g2r = e(func(u float64) float64 { x := p.g(u); return x * x * r(u) })
	m.dq2 = e(func(u float64) float64 { x := p.dq(u, s); return x * x })
	m.d2q = e(func(u float64) float64 { return p.d2q(u, s) })
	return m
}

// sumMoments returns the raw moments E[A], E[A²], E[A³], E[A⁴], E[B],
// E[B²], E[AB] and E[A²B] of A = Σg_i and B = Σr_i over m independent,
// identically distributed coordinates, by counting which indices of the
// expanded products coincide.
func sumMoments(v *valleyMoments, m float64) (a1, a2, a3, a4, b1, b2, ab, a2b float64) {
	m1, m2, m3 := m*(m-1), m*(m-1)*(m-2), m*(m-1)*(m-2)*(m-3)
	a1 = m * v.g1
	a2 = m*v.g2 + m1*v.g1*v.g1
	a3 = m*v.g3 + 3*m1*v.g2*v.g1 + m2*v.g1*v.g1*v.g1
	a4 = m*v.g4 + 4*m1*v.g3*v.g1 + 3*m1*v.g2*v.g2 + 6*m2*v.g2*v.g1*v.g1 + m3*v.g1*v.g1*v.g1*v.g1
	b1 = m * v.r1
	b2 = m*v.r2 + m1*v.r1*v.r1
	ab = m*v.gr + m1*v.g1*v.r1
	a2b = m*v.g2r + m1*(v.g2*v.r1+2*v.g1*v.gr) + m2*v.g1*v.g1*v.r1
	return
}

// valleyExact is what the quadrature gives for one dimension.
type valleyExact struct {
	mass      float64 // Gibbs mass of w₁ > 0, the degenerate side
	gradSq    float64 // E|∇U|²
	lap       float64 // E ΔU
	bias      float64 // η-free first-order shift of the mass: ∫_{w₁>0} ρ f₁
	absBound  float64 // ≥ ∫_{w₁>0} ρ |f₁|
	maxLocal  float64 // sup over |w₁| ≤ 1.8 of E[|f₁| | w₁]'s bound
	outerMass float64 // Gibbs mass of |w₁| > 1.8
}

// exact computes the Gibbs masses and the discretization terms of p in d
// dimensions with n-point rules.
//
// Reduction: given w₁ the perpendicular coordinates do not interact (U is
// h(w₁²−1)² plus a sum of terms each in one u_i), so the density of w₁ is
// ∝ e^{−h(w₁²−1)²/T}·G(s(w₁))^(d−1), G(s) = ∫e^{−q(u;s)/T}du, and the u_i
// are independent given w₁ with density π_s. Every expectation below is
// then an integral over w₁ of expectations over one u: 1-D quadratures.
//
// Discretization (as in optim/closedform_test.go, whose derivation in one
// dimension carries over term by term to d dimensions, with U′² → |∇U|²
// and U″ → ΔU — derived here the same way, by the expansion method of
// Talay and Tubaro, citation from memory): the Euler–Maruyama chain's
// stationary density is ρ(1 + ηf₁) + O(η²) with
//
//	f₁ = |∇U|²/(4T) − ΔU/2 + E_ρ[ΔU]/4,
//
// the constant making ∫ρf₁ = 0 by E_ρ|∇U|² = T·E_ρ[ΔU] (integration by
// parts), which the test checks as a test of this reduction. Writing
// A = Σg_i, B = Σr_i with r = dq²/(4T) − d2q/2,
//
//	f₁ = (D′ + s′A)²/(4T) − (D″ + s″A)/2 + B + E_ρ[ΔU]/4,  D = h(w₁²−1)²,
//
// a quadratic in A plus B, so its mean and variance given w₁ follow from
// the moments of sums of independent terms (sumMoments), and
// E[|f₁| | w₁] ≤ |E[f₁ | w₁]| + sd(f₁ | w₁) bounds ∫_{w₁>0}ρ|f₁| from above.
func (p valley) exact(d, n int) valleyExact {
	m := float64(d - 1)
	T := p.temp
	one := func(float64, *valleyMoments) float64 { return 1 }
	z := p.overW1(d, -4, 4, n, one)
	var x valleyExact
	x.mass = p.overW1(d, 0, 4, n, one) / z
	x.outerMass = (p.overW1(d, -4, -1.8, n, one) + p.overW1(d, 1.8, 4, n, one)) / z
	der := func(w1 float64) (d1, d2 float64) {
		return 4 * p.h * w1 * (w1*w1 - 1), 4 * p.h * (3*w1*w1 - 1)
	}
	gradSq := func(w1 float64, v *valleyMoments) float64 {
		_, ds, _ := p.step(w1)
		d1, _ := der(w1)
		a1, a2, _, _, _, _, _, _ := sumMoments(v, m)
		return d1*d1 + 2*d1*ds*a1 + ds*ds*a2 + m*v.dq2
	}
	lap := func(w1 float64, v *valleyMoments) float64 {
		_, _, d2s := p.step(w1)
		_, d2 := der(w1)
		return d2 + d2s*m*v.g1 + m*v.d2q
	}
	x.gradSq = p.overW1(d, -4, 4, n, gradSq) / z
	x.lap = p.overW1(d, -4, 4, n, lap) / z
	c := x.lap / 4
	// meanSD returns E[f₁ | w₁] and sd(f₁ | w₁).
	meanSD := func(w1 float64, v *valleyMoments) (mean, sd float64) {
		_, ds, d2s := p.step(w1)
		d1, d2 := der(w1)
		a1, a2, a3, a4, b1, b2, ab, a2b := sumMoments(v, m)
		// f₁ = α + βA + γA² + B.
		alpha := d1*d1/(4*T) - d2/2 + c
		beta := d1*ds/(2*T) - d2s/2
		gamma := ds * ds / (4 * T)
		ex := beta*a1 + gamma*a2 + b1
		ex2 := beta*beta*a2 + gamma*gamma*a4 + b2 + 2*beta*gamma*a3 + 2*beta*ab + 2*gamma*a2b
		return alpha + ex, math.Sqrt(math.Max(0, ex2-ex*ex))
	}
	x.bias = p.overW1(d, 0, 4, n, func(w1 float64, v *valleyMoments) float64 { mu, _ := meanSD(w1, v); return mu }) / z
	x.absBound = p.overW1(d, 0, 4, n, func(w1 float64, v *valleyMoments) float64 { mu, sd := meanSD(w1, v); return math.Abs(mu) + sd }) / z
	for i := range 181 {
		w1 := -1.8 + 0.02*float64(i)
		s, _, _ := p.step(w1)
		v := p.moments(s, n)
		mu, sd := meanSD(w1, &v)
		x.maxLocal = math.Max(x.maxLocal, math.Abs(mu)+sd)
	}
	return x
}

// valleyBatches is the number of batch means, and valleyNSE the width in
// batch-means standard errors of every statistical check, as cfBatches and
// cfNSE in optim/closedform_test.go and for the same reason: with 50
// batches (estimate − truth)/SE is close to Student's t with 49 degrees of
// freedom, for which P(|t| > 5) = 7.7e-6 (gonum stat/distuv.StudentsT), so
// a correct trainer fails one of the five checks here with probability
// near 4e-5 whatever the seed.
const (
	valleyBatches = 50
	valleyNSE     = 5
)

// valleyChain runs the trainer's Langevin steps on U in d dimensions from
// w = (1, 0, …, 0), the degenerate minimum's centre, and returns the
// fraction of the kept steps with w₁ > 0 in each of valleyBatches batches.
func valleyChain(t *testing.T, p valley, d int, eta float64, seed uint64, burn, keep int) []float64 {
	t.Helper()
	nw, err := net.NewBuilder[float64](1).Readout("w", d).Build()
	if err != nil {
		t.Fatal(err)
	}
	w := nw.Params()[0].Value // d×1: the outputs on input 1
	w[0] = 1
	set := &data.Set[float64]{X: []float64{1}, Y: make([]float64, d), Rows: 1, Features: 1, Outputs: d}
	per := keep / valleyBatches
	frac := make([]float64, valleyBatches)
	seen := 0
	hooks := &optim.Hooks{Step: func(s *optim.StepInfo) error {
		// Called after the update: w is the chain's state after step s.Step.
		if s.Step > burn {
			if w[0] > 0 {
				frac[seen/per]++
			}
			seen++
		}
		return nil
	}}
	tr, err := optim.NewTrainer[float64](nw, &valleyLoss{p: p, grad: make([]float64, d)}, set, optim.Settings{
		LearningRate: eta, Temperature: p.temp, Epochs: burn + valleyBatches*per, Seed: seed, Hooks: hooks,
	})
	if err != nil {
		t.Fatal(err)
	}
	res, err := tr.Run(context.Background())
	if err != nil || res.Status != optim.Finished {
		t.Fatalf("d = %d: run ended with status %v, error %v", d, res.Status, err)
	}
	for i := range frac {
		frac[i] /= float64(per)
	}
	return frac
}

// meanSE returns the mean of batch means and its standard error,
// sd/√(number of batches).
func meanSE(bm []float64) (mean, se float64) {
	n := float64(len(bm))
	for _, v := range bm {
		mean += v / n
	}
	var ss float64
	for _, v := range bm {
		ss += (v - mean) * (v - mean)
	}
	return mean, math.Sqrt(ss/(n-1)) / math.Sqrt(n)
}

// The potential, its exact masses and the chains. Parameters: h = 1 and
// T = 1 (a barrier of one T between the minima, crossed thousands of times
// per run), k = 4, c = 1, b = 0.25, a = 0.5, η = 0.002.
//
// Why the mass grows: far from the barrier the perpendicular factor of
// each side is G(0) = √(2πT/k) on the isolated side and
// G(1) = 2b + 2Γ(5/4)(T/c)^(1/4) on the degenerate one (the flat stretch
// plus the two quartic walls), once per perpendicular dimension, so in the
// low-temperature limit the degenerate side's share of the mass is
// G(1)^(d−1)/(G(0)^(d−1) + G(1)^(d−1)), which grows with d whenever
// G(1) > G(0): here 2.313 against 1.253. The exact masses include the
// barrier region, where s changes, by quadrature.
//
// What was found: the claim holds, exactly and in the chains (values when
// written): exact masses 0.5, 0.6413, 0.9110 for d = 1, 2, 5; chain masses
// 0.4996 ± 0.0060, 0.6393 ± 0.0048, 0.9137 ± 0.0029, each within one
// standard error of the exact value. What these checks resolve: the
// dimensions from each other (checked below), not a noise scale a little
// off — the exact mass at 1.2T is 0.8914 for d = 5, inside the band; the
// trainer's noise scale is checked to a few percent by optim's own
// Langevin tests.
func TestClaimLangevinDegenerateMass(t *testing.T) {
	p := valley{h: 1, k: 4, c: 1, b: 0.25, a: 0.5, temp: 1}
	const eta = 0.002
	dims := []int{1, 2, 5}

	// The quadrature, checked against closed forms: G(0) = √(2πT/k), the
	// Gaussian integral, and G(1) = 2b + 2∫₀^∞ e^{−c v⁴/T} dv =
	// 2b + 2Γ(5/4)(T/c)^(1/4) (the substitution x = c v⁴/T). 64-point rules
	// on pieces where the integrand is analytic are exact to round-off for
	// these smooth integrands; 1e-12 leaves room for the sums.
	const n = 64
	if got, want := p.perp(0, n, func(float64) float64 { return 1 }), math.Sqrt(2*math.Pi*p.temp/p.k); relDiff(got, want) > 1e-12 {
		t.Fatalf("G(0) = %.15g by quadrature, want √(2πT/k) = %.15g", got, want)
	}
	if got, want := p.perp(1, n, func(float64) float64 { return 1 }), 2*p.b+2*math.Gamma(1.25)*math.Pow(p.temp/p.c, 0.25); relDiff(got, want) > 1e-12 {
		t.Fatalf("G(1) = %.15g by quadrature, want 2b + 2Γ(5/4)(T/c)^(1/4) = %.15g", got, want)
	}
	exact := make([]valleyExact, len(dims))
	for i, d := range dims {
		exact[i] = p.exact(d, n)
		x := exact[i]
		// A second rule, of 48 points, must agree: the outer integrand is
		// only C³ at ±a, where the pieces meet, so agreement between two
		// rules is the check of convergence there.
		if y := p.exact(d, 48); math.Abs(y.mass-x.mass) > 1e-10 {
			t.Errorf("d = %d: exact mass %.12g with 64 points, %.12g with 48: the quadrature has not converged", d, x.mass, y.mass)
		}
		// E|∇U|² = T·E[ΔU] under the Gibbs law (integration by parts,
		// ρ′ = −ρ∇U/T), an identity the reduction must reproduce; 1e-9
		// relative is far below any error in the moment formulas.
		if relDiff(x.gradSq, p.temp*x.lap) > 1e-9 {
			t.Errorf("d = %d: E|∇U|² = %.12g, T·E[ΔU] = %.12g: the reduction to 1-D integrals is wrong", d, x.gradSq, p.temp*x.lap)
		}
		t.Logf("d = %d: exact mass of the degenerate side %.6f; E|∇U|² %.6g = T·EΔU %.6g; first-order shift η∫ρf₁ %+.2g; allowance 2η∫ρ|f₁| ≤ %.3g; η·sup|f₁| ≲ %.3g; mass beyond |w₁| = 1.8 %.2g",
			d, x.mass, x.gradSq, p.temp*x.lap, eta*x.bias, 2*eta*x.absBound, eta*x.maxLocal, x.outerMass)
	}
	// d = 1: the two sides are mirror images.
	if math.Abs(exact[0].mass-0.5) > 1e-12 {
		t.Errorf("d = 1: exact mass %.15g, want 1/2 by symmetry", exact[0].mass)
	}
	// The claim on the exact law.
	for i := 1; i < len(dims); i++ {
		if !(exact[i].mass > exact[i-1].mass) {
			t.Errorf("exact mass of the degenerate side %.6f in %d dimensions, not above %.6f in %d", exact[i].mass, dims[i], exact[i-1].mass, dims[i-1])
		}
	}

	if testing.Short() {
		t.Skip("long Markov chains; run without -short")
	}

	// The chains. The slowest relaxation is the crossing of the barrier:
	// in one dimension roughly at Kramers' rate √(U″(1)|U″(0)|)/(2π)·e^{−h/T}
	// = √32/(2π)·e^{−1} ≈ 0.33 per unit time each way (from memory; only
	// an estimate for a barrier as low as T), and the added dimensions
	// change it by entropic factors of order 1. The
	// burn-in of 100 time units (50,000 steps) is some 30 crossing times;
	// the 8e6 kept steps are 16,000 time units, in 50 batches of 320,
	// each about a hundred crossing times long, so the batch means are
	// nearly independent.
	const burn, keep = 50_000, 8_000_000
	got := make([]float64, len(dims))
	se := make([]float64, len(dims))
	for i, d := range dims {
		x := exact[i]
		// Validity of the first-order expansion, as in optim's double-well
		// test: η|f₁| at most 0.25 over the range that holds all but a
		// sliver of the mass.
		if eta*x.maxLocal > 0.25 || x.outerMass > 1e-2 {
			t.Fatalf("d = %d: η·sup|f₁| = %.3g over |w₁| ≤ 1.8, mass outside %.2g: η is too large for the first-order allowance", d, eta*x.maxLocal, x.outerMass)
		}
		allow := 2 * eta * x.absBound
		got[i], se[i] = meanSE(valleyChain(t, p, d, eta, uint64(20+d), burn, keep))
		band := valleyNSE*se[i] + allow
		t.Logf("d = %d: chain mass %.5f ± %.5f, exact %.5f, difference %+.5f, band %d SE + allowance = %.4f", d, got[i], se[i], x.mass, got[i]-x.mass, valleyNSE, band)
		if diff := math.Abs(got[i] - x.mass); diff > band {
			t.Errorf("d = %d: chain mass %.5f, exact %.5f: |difference| %.3g > %d SE + discretization allowance = %.3g", d, got[i], x.mass, diff, valleyNSE, band)
		}
		// Resolution: the band must be narrower than half the distance to
		// the neighbouring dimensions' exact masses, else this check could
		// not tell the d-dimensional law from theirs.
		for _, j := range []int{i - 1, i + 1} {
			if j >= 0 && j < len(dims) {
				if gap := math.Abs(exact[j].mass - x.mass); band > gap/2 {
					t.Errorf("d = %d: band %.3g is not below half the gap %.3g to the exact mass in %d dimensions", d, band, gap, dims[j])
				}
			}
		}
	}
	// The claim in the trainer's chains: each step up in dimension raises
	// the degenerate side's mass by more than 5 combined standard errors.
	for i := 1; i < len(dims); i++ {
		if d, s := got[i]-got[i-1], math.Hypot(se[i], se[i-1]); !(d > valleyNSE*s) {
			t.Errorf("chain mass %.5f in %d dimensions against %.5f in %d: a rise of %.3g, not above %d combined SE = %.3g", got[i], dims[i], got[i-1], dims[i-1], d, valleyNSE, valleyNSE*s)
		}
	}
}
