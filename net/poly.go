package net

import (
	"fmt"
	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/net/schema"
)

// Fit chooses how PolyReLU fits its polynomial to ReLU.
type Fit int

const (
	// FitLeastSquares minimizes the sum of squared errors at
	// M = PolyPointsPerCoef·(d+1) Chebyshev nodes of the first kind of the
	// interval, x_j = (a+b)/2 + (b−a)/2·cos(π(2j+1)/(2M)), j = 0, …, M−1.
	// The nodes cluster at the ends, so the fit weighs the ends the way the
	// Chebyshev weight 1/√(1−t²) does, rather than uniformly. It is the
	// zero value of Fit.
	FitLeastSquares Fit = iota
	// FitInterpolation interpolates ReLU at the d+1 Chebyshev nodes of the
	// first kind, x_k = (a+b)/2 + (b−a)/2·cos(π(2k+1)/(2(d+1))). It is
	// cheaper to fit and near-best in the uniform norm.
	FitInterpolation
)

func (f Fit) String() string {
	switch f {
	case FitLeastSquares:
		return schema.FitLeastSquares
	case FitInterpolation:
		return schema.FitInterpolation
	}
	return fmt.Sprintf("Fit(%d)", int(f))
}

const (
	// PolyMaxDegree is the largest degree PolyReLU accepts. The Chebyshev
	// basis keeps fitting and evaluation stable at any degree, but ReLU's
	// kink caps what degree buys: the uniform error only falls like 1/d,
	// while outside [a, b] the polynomial grows like (2|t|)^d/2. Beyond 64
	// the trade is poor.
	PolyMaxDegree = arith.PolyMaxDegree
	// PolyPointsPerCoef sets the number of points of FitLeastSquares:
	// 50 per coefficient, so the discrete fit is within a few parts in 10⁴
	// of the continuous one (aliasing; see the tests).
	PolyPointsPerCoef = arith.PolyPointsPerCoef
)

// PolyReLU replaces the rectifier with a polynomial p of degree d that
// approximates ReLU on an interval [a, b], applied elementwise. It exists
// for research: a polynomial network is smooth and algebraic, and the
// degree and interval set how closely it imitates ReLU.
//
// The polynomial is held in the Chebyshev basis of the interval:
//
//	p(x) = Σ_{k=0}^{d} c_k T_k(t),   t = (2x − a − b)/(b − a),
//
// and evaluated with Clenshaw's recurrence, which is stable for every
// degree; the derivative uses the Chebyshev coefficients of p'. Values are
// computed in float64 whatever T is, and rounded to T once.
//
// Outside [a, b] the polynomial is simply extrapolated: nothing clamps it,
// and it grows like |x|^d, much faster than ReLU. Inputs should be
// standardized (or the interval chosen wide enough) so that the node's
// inputs stay inside [a, b].
//
// How close it gets: on [−1, 1] the least-squares fit's uniform error is
// 1/(π(d+1)) for even d (the tail of ReLU's Chebyshev series), and
// interpolation's is at most twice that; both shrink only like 1/d,
// because of the kink. On an interval symmetric about 0 an odd degree buys
// nothing over the even degree below it: ReLU's odd part, x/2, is already
// exact at degree 1. The tests derive these figures.
//
// The fit happens in Connect. Like SmoothReLU, a PolyReLU network is not
// positively homogeneous.
type PolyReLU[T Float] struct {
	name   string
	degree int
	lo, hi float64
	fit    Fit
	width  int

	mid, scale float64   // t = (x − mid)·scale
	c          []float64 // Chebyshev coefficients of p in t
	dc         []float64 // Chebyshev coefficients of dp/dx in t
}

// NewPolyReLU returns a polynomial stand-in for ReLU of the given degree on
// [lo, hi]. The settings are checked, and the polynomial fitted, by Connect.
func NewPolyReLU[T Float](name string, degree int, lo, hi float64, fit Fit) *PolyReLU[T] {
	return &PolyReLU[T]{name: name, degree: degree, lo: lo, hi: hi, fit: fit}
}

func (p *PolyReLU[T]) Name() string        { return p.name }
func (p *PolyReLU[T]) Kind() string        { return schema.KindPolyReLU }
func (p *PolyReLU[T]) Params() []*Param[T] { return nil }

// Degree returns d, the degree of the polynomial.
func (p *PolyReLU[T]) Degree() int { return p.degree }

// Interval returns [a, b], the interval on which p approximates ReLU.
func (p *PolyReLU[T]) Interval() (lo, hi float64) { return p.lo, p.hi }

// Fit returns how p is fitted.
func (p *PolyReLU[T]) Fit() Fit { return p.fit }

func (p *PolyReLU[T]) String() string {
	return fmt.Sprintf("%s: degree %d on [%g, %g], %v", p.name, p.degree, p.lo, p.hi, p.fit)
}

// Coefficients returns c_0, …, c_d, the Chebyshev coefficients of p in the
// scaled variable t = (2x − a − b)/(b − a); c_0 is not halved. It returns
// nil before Connect. The slice is a copy.
func (p *PolyReLU[T]) Coefficients() []float64 {
	if p.c == nil {
		return nil
	}
	return append([]float64(nil), p.c...)
}

// Monomial returns m_0, …, m_d with p(x) = Σ m_k x^k, in the unscaled x.
// It is for inspection, not for computing: the monomial basis is
// ill-conditioned, the m_k of a degree-d fit can be as large as (1+√2)^d
// while p stays below 1, and their rounding errors, ε times that, then
// swamp p; an interval far from 0 makes it worse. Evaluate with the node
// or with Coefficients instead. It returns nil before Connect.
func (p *PolyReLU[T]) Monomial() []float64 {
	if p.c == nil {
		return nil
	}
	d := p.degree
	// t(x) = scale·x − scale·mid; T_0 = 1, T_1 = t, T_{k+1} = 2t·T_k − T_{k−1},
	// each as monomial coefficients in x.
	a, b := p.scale, -p.scale*p.mid
	m := make([]float64, d+1)
	prev, cur := make([]float64, d+1), make([]float64, d+1)
	prev[0] = 1
	cur[0], cur[1] = b, a
	m[0] = p.c[0]
	for i := range d + 1 {
		m[i] += p.c[1] * cur[i]
	}
	for k := 1; k < d; k++ {
		next := make([]float64, d+1)
		for i := range d + 1 {
			next[i] = 2*b*cur[i] - prev[i]
			if i > 0 {
				next[i] += 2 * a * cur[i-1]
			}
		}
		for i := range d + 1 {
			m[i] += p.c[k+1] * next[i]
		}
		prev, cur = cur, next
	}
	return m
}

// Connect checks the settings and fits the polynomial.
func (p *PolyReLU[T]) Connect(in int) (int, error) {
	if p.fit != FitLeastSquares && p.fit != FitInterpolation {
		return 0, fmt.Errorf("polynomial ReLU fit %v: want FitLeastSquares or FitInterpolation", p.fit)
	}
	fit := arith.LeastSquares
	if p.fit == FitInterpolation {
		fit = arith.Interpolation
	}
	// arith.FitPoly checks the settings and fits: the one copy of the
	// fit, shared with serving (package net/classify).
	q, err := arith.FitPoly(p.degree, p.lo, p.hi, fit)
	if err != nil {
		return 0, err
	}
	if in < 1 {
		return 0, fmt.Errorf("input width %d: nothing to rectify", in)
	}
	p.width = in
	p.mid, p.scale, p.c = q.Mid, q.Scale, q.C
	p.dc = chebDerivative(p.c, p.scale)
	return in, nil
}

// chebDerivative returns the Chebyshev coefficients (c_0 not halved) of
// dp/dx = scale·dp/dt, from the recurrence b_{k−1} = b_{k+1} + 2k·c_k,
// b_d = b_{d+1} = 0, which holds for the convention with b_0 halved.
func chebDerivative(c []float64, scale float64) []float64 {
	d := len(c) - 1
	b := make([]float64, d+2)
	for k := d; k >= 1; k-- {
		b[k-1] = b[k+1] + 2*float64(k)*c[k]
	}
	b[0] /= 2
	out := b[:max(d, 1)]
	for i := range out {
		out[i] *= scale
	}
	return out
}

func (p *PolyReLU[T]) Forward(x, y []T, rows int) {
	x, y = x[:rows*p.width], y[:rows*p.width]
	for i, v := range x {
		y[i] = T(arith.Clenshaw(p.c, (float64(v)-p.mid)*p.scale))
	}
}

func (p *PolyReLU[T]) Backward(x, y, dy, dx []T, rows int) {
	if dx == nil {
		return
	}
	x, dy, dx = x[:rows*p.width], dy[:rows*p.width], dx[:rows*p.width]
	for i, v := range x {
		dx[i] = T(float64(dy[i]) * arith.Clenshaw(p.dc, (float64(v)-p.mid)*p.scale))
	}
}
