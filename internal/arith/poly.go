package arith

import (
	"errors"
	"fmt"
	"math"
)

// Fit chooses how a polynomial rectifier is fitted to ReLU.
type Fit int

const (
	// LeastSquares minimizes the sum of squared errors at
	// M = PolyPointsPerCoef·(d+1) Chebyshev nodes of the first kind.
	LeastSquares Fit = iota
	// Interpolation interpolates ReLU at the d+1 Chebyshev nodes of the
	// first kind.
	Interpolation
)

const (
	// PolyMaxDegree is the largest degree a polynomial rectifier may have.
	PolyMaxDegree = 64
	// PolyPointsPerCoef sets the number of points of the least-squares
	// fit: 50 per coefficient.
	PolyPointsPerCoef = 50
)

// Poly is a polynomial fitted to ReLU on an interval [lo, hi], held in the
// Chebyshev basis of the interval: p(x) = Σ_k C_k T_k(t), with
// t = (x − Mid)·Scale, Mid = lo/2 + hi/2, Scale = 2/(hi − lo).
type Poly struct {
	Mid, Scale float64
	C          []float64 // c_0 … c_d; c_0 is not halved
}

// CheckPoly checks the settings of a polynomial rectifier of degree d on
// [lo, hi]. The messages name the setting at fault.
func CheckPoly(degree int, lo, hi float64) error {
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case degree < 1 || degree > PolyMaxDegree:
		return fmt.Errorf("polynomial ReLU degree %d: want a degree from 1 to %d", degree, PolyMaxDegree)
	case !finite(lo) || !finite(hi):
		return fmt.Errorf("polynomial ReLU interval [%v, %v]: the bounds must be finite numbers", lo, hi)
	case !(lo < hi):
		return fmt.Errorf("polynomial ReLU interval [%v, %v]: want lo < hi", lo, hi)
	}
	if w := hi - lo; math.IsInf(w, 0) || math.IsInf(2/w, 0) {
		return fmt.Errorf("polynomial ReLU interval [%v, %v]: too narrow or too wide to scale to [−1, 1]; standardize the inputs and use an interval of moderate width", lo, hi)
	}
	return nil
}

// FitPoly checks the settings of a polynomial rectifier (CheckPoly) and
// fits it.
func FitPoly(degree int, lo, hi float64, fit Fit) (Poly, error) {
	if err := CheckPoly(degree, lo, hi); err != nil {
		return Poly{}, err
	}
	p := Poly{Mid: lo/2 + hi/2, Scale: 2 / (hi - lo)}
	switch fit {
	case LeastSquares:
		p.C = p.leastSquares(degree)
	case Interpolation:
		p.C = p.interpolate(degree)
	default:
		return Poly{}, errors.New("polynomial ReLU fit: want least squares or interpolation")
	}
	return p, nil
}

// ChebNode returns cos(π(2j+1)/(2m)), the j-th of the m Chebyshev nodes of
// the first kind in [−1, 1].
func ChebNode(j, m int) float64 { return math.Cos(math.Pi * float64(2*j+1) / float64(2*m)) }

// relu returns ReLU(x) at the x that maps to t.
func (p Poly) relu(t float64) float64 { return max(p.Mid+t/p.Scale, 0) }

// interpolate returns the coefficients of the interpolant at the n = d+1
// Chebyshev nodes t_k = cos θ_k, θ_k = π(2k+1)/(2n): by the discrete
// orthogonality of cos(jθ_k) over these nodes,
// c_j = (2/n) Σ_k f(t_k) cos(jθ_k), with the factor 1/n for c_0.
func (p Poly) interpolate(d int) []float64 {
	n := d + 1
	c := make([]float64, n)
	f := make([]float64, n)
	for k := range n {
		f[k] = p.relu(ChebNode(k, n))
	}
	for j := range n {
		s := 0.0
		for k := range n {
			s += float64(f[k] * math.Cos(float64(j)*math.Pi*float64(2*k+1)/float64(2*n)))
		}
		c[j] = 2 * s / float64(n)
	}
	c[0] /= 2
	return c
}

// leastSquares fits ReLU in the least-squares sense at M = 50(d+1)
// Chebyshev nodes t_j. Over these nodes the Chebyshev polynomials of
// degree below M are discretely orthogonal, Σ_j T_k(t_j) T_l(t_j) = 0 for
// k ≠ l, M for k = l = 0 and M/2 otherwise (Mason and Handscomb, Chebyshev
// Polynomials, 2003, §4.6; from memory), so the normal equations are
// diagonal and
//
//	c_0 = (1/M) Σ_j f(t_j),   c_k = (2/M) Σ_j f(t_j) T_k(t_j).
//
// The tests check the result against gonum's Householder QR solution of
// the same problem.
func (p Poly) leastSquares(d int) []float64 {
	n := d + 1
	m := PolyPointsPerCoef * n
	c := make([]float64, n)
	for j := range m {
		t := ChebNode(j, m)
		f := p.relu(t)
		// T_0 = 1, T_1 = t, T_{k+1} = 2t·T_k − T_{k−1}.
		tkm, tk := 1.0, t
		c[0] += f
		if n > 1 {
			c[1] += float64(f * tk)
		}
		for k := 2; k < n; k++ {
			tkm, tk = tk, float64(2*t*tk)-tkm
			c[k] += float64(f * tk)
		}
	}
	c[0] /= float64(m)
	for k := 1; k < n; k++ {
		c[k] = 2 * c[k] / float64(m)
	}
	return c
}

// Clenshaw returns Σ c_k T_k(t): b_k = c_k + 2t·b_{k+1} − b_{k+2}, then
// c_0 + t·b_1 − b_2. Each product is converted explicitly, float64(a*b),
// which the Go specification says rounds it, so that no compiler fuses a
// multiply and an add into one FMA and the bits are the same on every
// architecture.
func Clenshaw(c []float64, t float64) float64 {
	var b1, b2 float64
	for k := len(c) - 1; k >= 1; k-- {
		b1, b2 = c[k]+float64(2*t*b1)-b2, b1
	}
	return c[0] + float64(t*b1) - b2
}

// Eval returns p(x), in float64.
func (p Poly) Eval(x float64) float64 { return Clenshaw(p.C, float64((x-p.Mid)*p.Scale)) }
