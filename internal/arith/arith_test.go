package arith_test

import (
	"fmt"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/internal/arith"
	"github.com/rhomb/rhomb/internal/kern"
)

// exactFMA is x·y + z rounded once in T, computed exactly with math/big
// (300 bits hold the exact product and sum of float64 operands) and
// rounded to nearest even by big.Float's conversions: the test's own
// reference, independent of FMA32.
func exactFMA32(x, y, z float32) float32 {
	bx := new(big.Float).SetPrec(300).SetFloat64(float64(x))
	by := new(big.Float).SetPrec(300).SetFloat64(float64(y))
	bz := new(big.Float).SetPrec(300).SetFloat64(float64(z))
	r := new(big.Float).SetPrec(300).Mul(bx, by)
	r.Add(r, bz)
	if r.Sign() == 0 {
		// Exact zero: IEEE 754 §6.3 gives +0 for a sum of opposite signs
		// in round-to-nearest (from memory); float64 arithmetic gets the
		// sign of zero right because the product is exact.
		return float32(float64(x)*float64(y) + float64(z))
	}
	f, _ := r.Float32()
	return f
}

// TestFMA32 checks the float32 fused multiply-add against math/big on
// random operands and on near-half-way cases, where rounding the float64
// sum to float32 would round twice wrongly.
func TestFMA32(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	check := func(x, y, z float32) {
		t.Helper()
		if got, want := arith.FMA32(x, y, z), exactFMA32(x, y, z); math.Float32bits(got) != math.Float32bits(want) {
			t.Fatalf("FMA32(%v, %v, %v) = %v, exact rounding %v", x, y, z, got, want)
		}
	}
	for range 20000 {
		check(float32(rng.NormFloat64()), float32(rng.NormFloat64()), float32(rng.NormFloat64()*math.Exp2(float64(rng.IntN(60)-30))))
	}
	for range 20000 {
		// z on a float32 grid, x·y a hair off half its last place.
		z := float32(1 + rng.Float64())
		half := math.Exp2(-24) // half an ulp of z in [1, 2)
		x := float32(half * (1 + math.Exp2(-20)*float64(rng.IntN(9)-4)))
		check(x, 1, z)
		check(x, float32(1+math.Exp2(-23)*float64(rng.IntN(3))), z)
	}
}

// TestDotIsTheKernelRule: Dot, the serving side's sum, gives the same bits
// as the training side's matrix product (internal/kern, every kernel the
// machine has) for widths around the block length, in float32 and
// float64. kern's own tests check each kernel against the rule; this ties
// the rule to the one serving uses.
func TestDotIsTheKernelRule(t *testing.T) {
	for _, in := range []int{1, 7, 255, 256, 257, 600, 1030} {
		t.Run(fmt.Sprintf("in=%d", in), func(t *testing.T) {
			dotVsGemm[float64](t, in)
			dotVsGemm[float32](t, in)
		})
	}
}

func dotVsGemm[T arith.Float](t *testing.T, in int) {
	t.Helper()
	const rows, out = 5, 9
	rng := rand.New(rand.NewPCG(uint64(in), 3))
	x, w := make([]T, rows*in), make([]T, out*in)
	for i := range x {
		x[i] = T(rng.NormFloat64())
	}
	for i := range w {
		w[i] = T(rng.NormFloat64())
	}
	y := make([]T, rows*out)
	// y = x·Wᵀ, as a dense layer computes its outputs (net/dense.go).
	kern.Gemm(false, true, rows, out, in, 1, x, in, w, in, 0, y, out)
	rowOut := make([]T, out)
	for r := range rows {
		arith.DotRows(x[r*in:(r+1)*in], w, rowOut)
		for j := range out {
			got := arith.Dot(x[r*in:(r+1)*in], w[j*in:(j+1)*in])
			if float64(got) != float64(y[r*out+j]) || math.Signbit(float64(got)) != math.Signbit(float64(y[r*out+j])) {
				t.Fatalf("%T row %d output %d: Dot %v, kern.Gemm %v", got, r, j, got, y[r*out+j])
			}
			if g := rowOut[j]; float64(g) != float64(got) || math.Signbit(float64(g)) != math.Signbit(float64(got)) {
				t.Fatalf("%T row %d output %d: DotRows %v, Dot %v", got, r, j, g, got)
			}
		}
	}
}

// TestDotRowsIsDot: DotRows, which computes four outputs at a time, gives
// Dot's bits for every count of outputs (whole groups of four and the
// rest) and for widths around the block length, including zeros of
// either sign and a width of zero.
func TestDotRowsIsDot(t *testing.T) {
	for _, in := range []int{0, 1, 5, 256, 257, 513} {
		for out := range 10 {
			dotRowsVsDot[float64](t, in, out)
			dotRowsVsDot[float32](t, in, out)
		}
	}
}

func dotRowsVsDot[T arith.Float](t *testing.T, in, out int) {
	t.Helper()
	rng := rand.New(rand.NewPCG(uint64(in), uint64(out)))
	x, w := make([]T, in), make([]T, out*in)
	for i := range x {
		x[i] = T(rng.NormFloat64())
		if i%7 == 3 {
			x[i] = T(math.Copysign(0, float64(x[i])))
		}
	}
	for i := range w {
		w[i] = T(rng.NormFloat64())
	}
	y := make([]T, out)
	arith.DotRows(x, w, y)
	for j := range out {
		want := arith.Dot(x, w[j*in:(j+1)*in])
		if float64(y[j]) != float64(want) || math.Signbit(float64(y[j])) != math.Signbit(float64(want)) {
			t.Fatalf("%T in %d out %d output %d: DotRows %v, Dot %v", want, in, out, j, y[j], want)
		}
	}
}

// TestLeastSquaresAgainstQR compares the closed-form least-squares fit
// with gonum's Householder QR solution of the same problem (A_jk = T_k(t_j)
// at the M = 50n Chebyshev nodes).
//
// Tolerance. Householder QR is backward stable for least squares: the
// computed solution solves a problem with ‖ΔA_j‖ ≤ γ̃_{Mn}‖A_j‖ per column,
// γ̃_{Mn} ≈ c·M·n·u with a small constant c (Higham, Accuracy and Stability
// of Numerical Algorithms, 2nd ed., Thm 20.3; from memory). The
// perturbation bound for least squares (Higham Thm 20.1; from memory) is
// then ‖Δc‖/‖c‖ ≤ κε(2 + (κ + 1)‖r‖/(‖A‖‖c‖)) with κ = κ₂(A) = √2 for
// this basis and ‖r‖ ≤ ‖f‖ ≤ ‖A‖‖c‖. The closed form's error is smaller:
// each c_k is a sum of M terms of size at most max|f|, within γ_M of
// exact. With c = 4, u = 2⁻⁵³: tol = √2·4Mnu·(2 + √2 + 1)·‖c‖.
func TestLeastSquaresAgainstQR(t *testing.T) {
	for _, tc := range []struct {
		d      int
		lo, hi float64
	}{{1, -1, 1}, {4, -3, 3}, {6, -4, 4}, {7, -2, 5}, {20, -1, 1}, {64, -6, 6}} {
		p, err := arith.FitPoly(tc.d, tc.lo, tc.hi, arith.LeastSquares)
		if err != nil {
			t.Fatal(err)
		}
		n := tc.d + 1
		m := arith.PolyPointsPerCoef * n
		a := mat.NewDense(m, n, nil)
		f := mat.NewVecDense(m, nil)
		for j := range m {
			tj := arith.ChebNode(j, m)
			f.SetVec(j, max(p.Mid+tj/p.Scale, 0))
			a.Set(j, 0, 1)
			if n > 1 {
				a.Set(j, 1, tj)
			}
			for k := 2; k < n; k++ {
				a.Set(j, k, 2*tj*a.At(j, k-1)-a.At(j, k-2))
			}
		}
		var qr mat.QR
		qr.Factorize(a)
		var want mat.VecDense
		if err := qr.SolveVecTo(&want, false, f); err != nil {
			t.Fatal(err)
		}
		var diff, norm float64
		for k := range n {
			d := p.C[k] - want.AtVec(k)
			diff += d * d
			norm += want.AtVec(k) * want.AtVec(k)
		}
		diff, norm = math.Sqrt(diff), math.Sqrt(norm)
		tol := math.Sqrt2 * 4 * float64(m*n) * 0x1p-53 * (2 + math.Sqrt2 + 1) * norm
		if !(diff <= tol) {
			t.Errorf("degree %d on [%v, %v]: ‖c − c_QR‖ = %g > %g", tc.d, tc.lo, tc.hi, diff, tol)
		}
	}
}

// TestSmoothReLUClosedForms: log(1 + e^{βu})/β at u = 0 is log(2)/β, and
// for large |βu| it tends to max(u, 0) (common practice, no source: the
// softplus identities).
func TestSmoothReLUClosedForms(t *testing.T) {
	for _, b := range []float64{0.5, 1, 4, 100} {
		if got, want := arith.SmoothReLU(0, b), math.Ln2/b; math.Abs(got-want) > 2*0x1p-52*want {
			t.Errorf("β=%v: value at 0 %v, want log(2)/β = %v", b, got, want)
		}
		if got := arith.SmoothReLU(800/b, b); got != 800/b {
			t.Errorf("β=%v: value at 800/β %v, want %v (e^{-800} underflows)", b, got, 800/b)
		}
		if got := arith.SmoothReLU(-800/b, b); got != 0 {
			t.Errorf("β=%v: value at -800/β %v, want 0", b, got)
		}
	}
	if arith.CheckSharpness[float32](1e-40) == nil || arith.CheckSharpness[float64](0) == nil || arith.CheckSharpness[float64](math.NaN()) == nil {
		t.Error("CheckSharpness accepted a sharpness whose value at 0 overflows, or a non-positive one")
	}
}

// TestPredictionSet: the classes with 1 − p ≤ q, in order (the textbook
// split-conformal set, worked by hand here), or the most probable class
// when none qualifies.
func TestPredictionSet(t *testing.T) {
	p := []float64{0.15, 0.6, 0.25}
	for _, tc := range []struct {
		q    float64
		want []int
	}{{0.9, []int{0, 1, 2}}, {0.8, []int{1, 2}}, {0.4, []int{1}}, {0.3, []int{1}}, {0, []int{1}}} {
		// 1 − p = 0.85, 0.4, 0.75: q = 0.9 takes all three, 0.8 the last
		// two, 0.4 only the middle one, and 0.3 or 0 none, so the most
		// probable class (1) stands alone.
		got := arith.PredictionSet(p, tc.q, nil)
		if fmt.Sprint(got) != fmt.Sprint(tc.want) {
			t.Errorf("q = %v: %v, want %v", tc.q, got, tc.want)
		}
	}
}
