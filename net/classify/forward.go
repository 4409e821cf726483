package classify

import (
	"errors"
	"fmt"
	"math"
)

// The forward pass reproduces the training library's (package net) node
// by node and operation by operation, so that a float64 model gives the
// same bits here as in training:
//
//   - A dense layer's output j is Σ_i x_i·W_ji rounded by the rule of the
//     training library's matrix product (see dot).
//   - ReLU is max(x, 0); the smoothed ReLU is
//     max(x, 0) + log1p(exp(−β|x|))/β; the polynomial ReLU is Clenshaw's
//     recurrence on t = (x − mid)·scale.
//
// Where the training code adds a product to something outside the matrix
// product (Clenshaw's recurrence, the polynomial fit), this package
// converts the product explicitly, float64(a*b), which the Go
// specification says rounds it, so the compiler may not fuse the multiply
// and the add into one FMA instruction. It never fuses on amd64 (the
// default GOAMD64=v1), so the bits equal the training library's there, and
// they are the same on arm64, where the compiler would otherwise fuse.
// (math.Exp, math.Log1p and math.Cos have per-architecture
// implementations, so smoothed and polynomial layers may still differ in
// the last bit between architectures.)
//
// Weights stored as float32 are widened exactly to float64 as they are
// read; arithmetic is float64 for every model.

type kind uint8

const (
	kindOne kind = iota
	kindDense
	kindReLU
	kindSmooth
	kindPoly
)

type layer struct {
	kind    kind
	in, out int
	w64     []float64 // dense: W, out×in row-major, when stored as float64
	w32     []float32 // dense: W when stored as float32
	beta    float64   // smooth-relu
	poly    *poly     // poly-relu
}

// forward runs one row x (len = features) through the layers, using a and
// b (each at least maxWidth long) as ping-pong buffers, and returns the
// output, which is a prefix of a or b.
func (m *Model) forward(x, a, b []float64) []float64 {
	cur := x
	for i := range m.layers {
		l := &m.layers[i]
		switch l.kind {
		case kindOne:
			y := a[:l.out]
			copy(y, cur)
			y[l.in] = 1
			cur, a, b = y, b, a
		case kindDense:
			y := a[:l.out]
			in := cur[:l.in]
			if l.w64 != nil {
				for j := range y {
					y[j] = dot(in, l.w64[j*l.in:(j+1)*l.in])
				}
			} else {
				for j := range y {
					y[j] = dot32(in, l.w32[j*l.in:(j+1)*l.in])
				}
			}
			cur, a, b = y, b, a
		case kindReLU:
			y := a[:len(cur)]
			for k, v := range cur {
				y[k] = max(v, 0)
			}
			cur, a, b = y, b, a
		case kindSmooth:
			y, bt := a[:len(cur)], l.beta
			for k, u := range cur {
				y[k] = max(u, 0) + math.Log1p(math.Exp(-bt*math.Abs(u)))/bt
			}
			cur, a, b = y, b, a
		case kindPoly:
			y, p := a[:len(cur)], l.poly
			for k, v := range cur {
				y[k] = clenshaw(p.c, (v-p.mid)*p.scale)
			}
			cur, a, b = y, b, a
		}
	}
	return cur
}

// poly is a fitted polynomial ReLU: p(x) = Σ c_k T_k(t), t = (x − mid)·scale.
type poly struct {
	mid, scale float64
	c          []float64
}

// newPoly checks a poly-relu's settings as the training library does and
// fits its polynomial again (the file stores only the settings).
func newPoly(degree int, lo, hi float64, fit string) (*poly, error) {
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	switch {
	case degree < 1 || degree > polyMaxDegree:
		return nil, fmt.Errorf("degree %d; want 1 to %d", degree, polyMaxDegree)
	case !finite(lo) || !finite(hi):
		return nil, fmt.Errorf("interval [%v, %v]: the bounds must be finite", lo, hi)
	case !(lo < hi):
		return nil, fmt.Errorf("interval [%v, %v]: want lo < hi", lo, hi)
	}
	if w := hi - lo; math.IsInf(w, 0) || math.IsInf(2/w, 0) {
		return nil, fmt.Errorf("interval [%v, %v] too narrow or too wide to scale to [−1, 1]", lo, hi)
	}
	p := &poly{mid: lo/2 + hi/2, scale: 2 / (hi - lo)}
	switch fit {
	case "least-squares":
		p.c = p.leastSquares(degree)
	case "interpolation":
		p.c = p.interpolate(degree)
	default:
		return nil, errors.New("fit " + fmt.Sprintf("%q", fit) + `; want "least-squares" or "interpolation"`)
	}
	return p, nil
}

func chebNode(j, m int) float64 { return math.Cos(math.Pi * float64(2*j+1) / float64(2*m)) }

func (p *poly) relu(t float64) float64 { return max(p.mid+t/p.scale, 0) }

// interpolate is the training library's interpolation fit, operation for
// operation: c_j = (2/n) Σ_k f(t_k) cos(jθ_k), c_0 halved, at the n = d+1
// Chebyshev nodes of the first kind.
func (p *poly) interpolate(d int) []float64 {
	n := d + 1
	c := make([]float64, n)
	f := make([]float64, n)
	for k := range n {
		f[k] = p.relu(chebNode(k, n))
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
// Chebyshev nodes t_j, as the training library does. Over these nodes the
// Chebyshev polynomials of degree below M are discretely orthogonal,
// Σ_j T_k(t_j) T_l(t_j) = 0 for k ≠ l, M for k = l = 0 and M/2 otherwise
// (Mason and Handscomb, Chebyshev Polynomials, 2003, §4.6; from memory),
// so the normal equations are diagonal and
//
//	c_0 = (1/M) Σ_j f(t_j),   c_k = (2/M) Σ_j f(t_j) T_k(t_j).
//
// The training library solves the same problem by Householder QR, which
// this package cannot link; the two agree to rounding (a few units in the
// last place of Σ|c_k|), not bit for bit. See the package documentation.
func (p *poly) leastSquares(d int) []float64 {
	n := d + 1
	m := polyPointsPerCoef * n
	c := make([]float64, n)
	for j := range m {
		t := chebNode(j, m)
		f := p.relu(t)
		// T_0 = 1, T_1 = t, T_{k+1} = 2t·T_k − T_{k−1}, as the training
		// library builds its matrix.
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

// clenshaw returns Σ c_k T_k(t): b_k = c_k + 2t·b_{k+1} − b_{k+2}, then
// c_0 + t·b_1 − b_2, in the training library's order of operations.
func clenshaw(c []float64, t float64) float64 {
	var b1, b2 float64
	for k := len(c) - 1; k >= 1; k-- {
		b1, b2 = c[k]+float64(2*t*b1)-b2, b1
	}
	return c[0] + float64(t*b1) - b2
}
