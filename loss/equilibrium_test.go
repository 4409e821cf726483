package loss_test

import (
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/loss"
)

// Worked by hand.
func TestRhoStarWorked(t *testing.T) {
	// Square, binary, f = (1, 2), y = (1, 1), λ = 0.5, N = 2:
	//   Σ⟨y,f⟩/N = 3/2, Σ‖f‖²/N = 5/2, ρ* = 1.5/(2.5 + 0.5) = 0.5.
	//   Check: L(ρ) = ((1 − ρ)² + (1 − 2ρ)²)/2 + 0.5ρ²; L(0.5) = 0.25,
	//   L(0.4) = L(0.6) = 0.28.
	if got := (loss.Square[float64]{}).RhoStar([]float64{1, 2}, []float64{1, 1}, 2, 1, 0.5); !near(got, 0.5, exactTol) {
		t.Errorf("square: ρ* = %v, want 0.5", got)
	}
	// Rescaled, K = 2, M = 3, C = 2, one row f = (1, 1) of class 0:
	//   L(ρ) = (1/2)[2(ρ − 3)² + ρ²] + λρ², dL/dρ = 2(ρ − 3) + ρ + 2λρ.
	//   λ = 0: 3ρ = 6, ρ* = 2.  λ = 0.5: 4ρ = 6, ρ* = 1.5.
	r := loss.Rescaled[float64]{K: 2, M: 3}
	for _, c := range []struct{ lambda, want float64 }{{0, 2}, {0.5, 1.5}} {
		if got := r.RhoStar([]float64{1, 1}, []float64{1, 0}, 1, 2, c.lambda); !near(got, c.want, exactTol) {
			t.Errorf("rescaled λ=%v: ρ* = %v, want %v", c.lambda, got, c.want)
		}
	}
	// All outputs zero and λ = 0: every ρ minimizes, and RhoStar is 0 by
	// its documentation.
	if got := (loss.Square[float64]{}).RhoStar([]float64{0, 0}, []float64{1, -1}, 2, 1, 0); got != 0 {
		t.Errorf("square, f = 0, λ = 0: ρ* = %v, want 0", got)
	}
}

// The summed convention of the square-loss dynamics (REFERENCES.md: ρ* =
// Σ_n y_n f_n / (Σ_n f_n² + λ′) for Σ_n (y_n − ρ f_n)² + λ′ρ², a closed form
// by calculus) is ours with λ′ = Nλ, as Square.RhoStar's doc says.
// Tolerance: two float64 sums of 40 terms and a division, rearranged
// (exactTol covers ≈ 40ε of cancellation-free rounding ≈ 9e-15).
func TestRhoStarSumConvention(t *testing.T) {
	const rows = 40
	rng := rand.New(rand.NewPCG(4, 4))
	f, y := make([]float64, rows), make([]float64, rows)
	var yf, ff float64
	for i := range f {
		f[i] = rng.NormFloat64()
		y[i] = float64(1 - 2*rng.IntN(2))
		yf += y[i] * f[i]
		ff += f[i] * f[i]
	}
	const lambda = 0.2
	want := yf / (ff + rows*lambda)
	if got := (loss.Square[float64]{}).RhoStar(f, y, rows, 1, lambda); !near(got, want, 1e-13) {
		t.Errorf("ρ* = %.17g, summed convention with λ′ = Nλ gives %.17g", got, want)
	}
}

// RhoStar against a minimization that does not use its formula: golden-
// section search (Kiefer 1953; common practice) on L(ρ) = Eval(ρ·f) + λρ²,
// for random batches. Golden-section needs only that L be unimodal, which a
// quadratic with positive curvature is. Tolerance: near its minimum L
// differs from L(ρ*) by a(ρ − ρ*)², which float64 comparisons cannot see
// below ε·|L|, so the search can stop anywhere within sqrt(ε·|L|/a) of ρ*;
// on these draws |L| ≤ 5 and a ≥ 0.8 (both logged on failure), which gives
// ≤ 4e-8 (3e-8 observed). 1e-6 leaves a factor of 25 and is far below the
// change a wrong term makes (a dropped λ or factor 1/C moves ρ* here by
// 1e-3 to 0.1).
func TestRhoStarMinimizes(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	type tc struct {
		f    loss.Func[float64]
		cols int
	}
	for _, c := range []tc{
		{loss.Square[float64]{}, 1},
		{loss.Square[float64]{}, 4},
		{loss.Rescaled[float64]{}, 4},
		{loss.Rescaled[float64]{K: 2, M: 3}, 4},
		{loss.Rescaled[float64]{K: 5, M: 0.5}, 10},
	} {
		const rows = 12
		n := rows * c.cols
		f, y, buf := make([]float64, n), make([]float64, n), make([]float64, n)
		for i := range f {
			f[i] = rng.NormFloat64()
		}
		for r := range rows {
			if c.cols == 1 {
				y[r] = float64(1 - 2*rng.IntN(2))
			} else {
				y[r*c.cols+rng.IntN(c.cols)] = 1
			}
		}
		for _, lambda := range []float64{0, 0.1, 2} {
			obj := func(rho float64) float64 {
				for i := range buf {
					buf[i] = rho * f[i]
				}
				return c.f.Eval(buf, y, rows, c.cols, nil) + lambda*rho*rho
			}
			got := c.f.(loss.Equilibrium[float64]).RhoStar(f, y, rows, c.cols, lambda)
			want := goldenMin(obj, -50, 50)
			if math.Abs(got-want) > 1e-6*max(1, math.Abs(want)) {
				a := (obj(1) + obj(-1) - 2*obj(0)) / 2
				t.Errorf("%s cols=%d λ=%v: RhoStar = %.12g, golden-section minimum %.12g (L = %.4g, curvature %.4g)",
					c.f.Name(), c.cols, lambda, got, want, obj(want), a)
			}
		}
	}
}

// goldenMin returns the minimizer of a unimodal f on [lo, hi] by golden-
// section search, run until the bracket stops shrinking in float64.
func goldenMin(f func(float64) float64, lo, hi float64) float64 {
	g := (math.Sqrt(5) - 1) / 2
	a, b := lo, hi
	c, d := b-g*(b-a), a+g*(b-a)
	fc, fd := f(c), f(d)
	for range 200 {
		if fc < fd {
			b, d, fd = d, c, fc
			c = b - g*(b-a)
			fc = f(c)
		} else {
			a, c, fc = c, d, fd
			d = a + g*(b-a)
			fd = f(d)
		}
	}
	return (a + b) / 2
}
