package kern

import (
	"fmt"
	"github.com/rhomb/rhomb/internal/arith"
	"math"
	"math/big"
	"math/rand/v2"
	"testing"
)

// current returns the micro-kernel Gemm uses for T.
func current[T Float]() microKernel[T] {
	switch any(T(0)).(type) {
	case float32:
		return any(kernel32).(microKernel[T])
	}
	return any(kernel64).(microKernel[T])
}

// kernelsOf lists every kernel this build and processor can run for T,
// and the pure-Go kernel at each assembly kernel's block shape.
func kernelsOf[T Float]() []microKernel[T] {
	var ks []microKernel[T]
	switch any(T(0)).(type) {
	case float32:
		ks = any(available32()).([]microKernel[T])
	default:
		ks = any(available64()).([]microKernel[T])
	}
	for _, k := range ks {
		if k.name != "go" {
			ks = append(ks, generic[T](k.mr, k.nr))
		}
	}
	return ks
}

// withKernel runs f with Gemm using mk for T, on every shape (choose
// takes no other kernel meanwhile).
func withKernel[T Float](mk microKernel[T], f func()) {
	oldOnly := onlyBest
	onlyBest = true
	defer func() { onlyBest = oldOnly }()
	switch v := any(mk).(type) {
	case microKernel[float32]:
		old := kernel32
		kernel32 = v
		defer func() { kernel32 = old }()
	case microKernel[float64]:
		old := kernel64
		kernel64 = v
		defer func() { kernel64 = old }()
	}
	f()
}

func kernelName[T Float](mk microKernel[T]) string {
	return fmt.Sprintf("kernel=%s-%dx%d", mk.name, mk.mr, mk.nr)
}

// fmaT is fused multiply-add rounded once in T, computed exactly with
// math/big (the product and sum are exact at 300 bits: float64 operands
// have 53-bit significands and exponents within ±1100) and rounded to
// nearest even by big.Float's conversions. It is the test's own
// implementation, independent of fma32 and of the kernels.
func fmaT[T Float](x, y, z T) T {
	bx := new(big.Float).SetPrec(300).SetFloat64(float64(x))
	by := new(big.Float).SetPrec(300).SetFloat64(float64(y))
	bz := new(big.Float).SetPrec(300).SetFloat64(float64(z))
	r := new(big.Float).SetPrec(300).Mul(bx, by)
	r.Add(r, bz)
	if r.Sign() == 0 {
		// Exact zero: IEEE 754 §6.3 gives +0 for a sum of opposite signs
		// in round-to-nearest, and the sign of the operands when both
		// are zeros of one sign (from memory).
		return T(float64(x)*float64(y) + float64(z))
	}
	switch any(T(0)).(type) {
	case float32:
		f, _ := r.Float32()
		return T(f)
	}
	f, _ := r.Float64()
	return T(f)
}

// fma32 is the float32 fused multiply-add of the rounding rule, kept in
// internal/arith.
var fma32 = arith.FMA32

// fastFMA is fused multiply-add rounded once in T: math.FMA for float64
// (the standard library's, correctly rounded by its documentation) and
// arith.FMA32 for float32 (checked against math/big in internal/arith).
func fastFMA[T Float](x, y, z T) T {
	switch v := any(x).(type) {
	case float32:
		return T(fma32(v, float32(y), float32(z)))
	}
	return T(math.FMA(float64(x), float64(y), float64(z)))
}

// ruleProduct computes pr's product element by element by the rule in the
// package doc, with fastFMA, starting from the C buffer c0 (in
// pr.c.s's layout); it returns the new buffer.
// alpha = 0 is not handled (the rule does not apply).
func ruleProduct[T Float](pr *problem[T], c0 []T, flags uintptr) []T {
	c := append([]T(nil), c0...)
	opA := func(i, l int) T {
		if pr.tA {
			return pr.a.s[l*pr.a.ld+i]
		}
		return pr.a.s[i*pr.a.ld+l]
	}
	opB := func(l, j int) T {
		if pr.tB {
			return pr.b.s[j*pr.b.ld+l]
		}
		return pr.b.s[l*pr.b.ld+j]
	}
	for i := range pr.m {
		for j := range pr.n {
			v := c[i*pr.c.ld+j]
			for b0 := 0; b0 < pr.k; b0 += kcBlock {
				var acc T
				for l := b0; l < min(b0+kcBlock, pr.k); l++ {
					acc = fastFMA(opA(i, l), opB(l, j), acc)
				}
				t := T(pr.alpha * acc)
				switch {
				case b0 > 0:
					v = fastFMA(1, v, t)
				case pr.beta == 0:
					v = t
				default:
					v = fastFMA(pr.beta, v, t)
				}
			}
			c[i*pr.c.ld+j] = v
		}
	}
	return c
}

// TestKernelsBitExact checks every kernel against the rounding rule of the
// package doc, bit for bit, computed element by element with math/big:
// every transposition, several alpha and beta (beta = 0 with NaN in C),
// on shapes that leave edge blocks in both
// directions and cross the kcBlock boundary (k = 257, 513), and on shapes
// of whole blocks, where small products read operands in place.
func TestKernelsBitExact(t *testing.T) {
	t.Run("float=64", testBitExact[float64])
	t.Run("float=32", testBitExact[float32])
}

func testBitExact[T Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	shapes := [][3]int{{1, 1, 1}, {7, 17, 3}, {17, 49, 257}, {33, 25, 513}, {9, 65, 256}}
	if testing.Short() || raceOn {
		shapes = shapes[:3]
	}
	for _, mk := range kernelsOf[T]() {
		// Whole blocks, small enough for the direct path of tile (which
		// reads Aᵀ and B in place), across a kcBlock boundary in the
		// last, so that the in-place panels start mid-matrix.
		direct := [][3]int{{mk.mr, mk.nr, 1}, {2 * mk.mr, 2 * mk.nr, 7}, {mk.mr, 2 * mk.nr, 300}}
		if mk.mr*2*mk.nr*300 >= parallelFlops {
			panic("direct shapes too large for the direct path")
		}
		withKernel(mk, func() {
			for si, sh := range append(shapes, direct...) {
				m, n, k := sh[0], sh[1], sh[2]
				la, lb := draw[T](rng, m*k), draw[T](rng, k*n)
				pads := [3]int{si % 3, (si + 1) % 3, (si + 2) % 3}
				for _, tAB := range [4][2]bool{{false, false}, {false, true}, {true, false}, {true, true}} {
					for _, ab := range [][2]float64{{1, 0}, {-0.75, 1.25}, {1, 1}} {
						{
							const flags = 0
							pr := newProblem[T](rng, tAB[0], tAB[1], m, n, k, la, lb, nil, nil, ab[0], ab[1], pads)
							want := ruleProduct(pr, pr.c.s, flags)
							gemmFlags(pr.tA, pr.tB, m, n, k, pr.alpha, pr.a.s, pr.a.ld, pr.b.s, pr.b.ld, pr.beta, pr.c.s, pr.c.ld, flags)
							bad := 0
							for i := range want {
								if bitsOf(want[i]) != bitsOf(pr.c.s[i]) {
									if bad++; bad <= 3 {
										t.Errorf("%s %s element %d (row %d, col %d) = %v, rule gives %v", kernelName(mk), pr.label, i, i/pr.c.ld, i%pr.c.ld, pr.c.s[i], want[i])
									}
								}
							}
							if bad > 3 {
								t.Errorf("%s %s: %d elements differ", kernelName(mk), pr.label, bad)
							}
						}
					}
				}
			}
		})
	}
}

// TestEveryKernelNaive runs the naive-product check of TestGemmNaive (edge
// shapes, guards, bound from the summation length) with every kernel this
// machine can run, not only the one Gemm chose.
func TestEveryKernelNaive(t *testing.T) {
	if raceOn {
		t.Skip("arithmetic only, and slow under the race detector; TestKernelsBitExact covers every kernel")
	}
	// The pure-Go kernel at the assembly kernels' shapes is left to
	// TestKernelsBitExact: available lists what Gemm can choose.
	for _, mk := range available64()[1:] {
		t.Run("float=64/"+kernelName(mk), func(t *testing.T) { withKernel(mk, func() { testAgainstNaive[float64](t) }) })
	}
	for _, mk := range available32()[1:] {
		t.Run("float=32/"+kernelName(mk), func(t *testing.T) { withKernel(mk, func() { testAgainstNaive[float32](t) }) })
	}
}

// TestReLU checks ReLU and ReLUMask against their scalar definitions (Go's
// max, and x > 0 ? dy : 0), bit for bit, on every length from 0 to 40
// (the vector loops take 8 or 4 elements at a time, the rest is scalar),
// with NaN, ±0 and ±Inf among the inputs and guards after the outputs.
func TestReLU(t *testing.T) {
	t.Run("float=64", testReLU[float64])
	t.Run("float=32", testReLU[float32])
}

func testReLU[T Float](t *testing.T) {
	rng := rand.New(rand.NewPCG(11, 11))
	special := []float64{math.NaN(), 0, math.Copysign(0, -1), math.Inf(1), math.Inf(-1)}
	for n := range 41 {
		x, dy := make([]T, n), make([]T, n)
		for i := range x {
			x[i], dy[i] = T(rng.NormFloat64()), T(rng.NormFloat64())
			if rng.IntN(4) == 0 {
				x[i] = T(special[rng.IntN(len(special))])
			}
		}
		y := make([]T, n+guardLen)
		dx := make([]T, n+guardLen)
		for i := range y {
			y[i], dx[i] = T(cGuard), T(cGuard)
		}
		ReLU(x, y)
		ReLUMask(x, dy, dx)
		for i := range y {
			wantY, wantDx := T(cGuard), T(cGuard)
			if i < n {
				wantY = max(x[i], 0)
				wantDx = 0
				if x[i] > 0 {
					wantDx = dy[i]
				}
			}
			if bitsOf(y[i]) != bitsOf(wantY) {
				t.Errorf("n=%d: ReLU y[%d] = %v for x = %v, want %v", n, i, y[i], x[i%max(n, 1)], wantY)
			}
			if bitsOf(dx[i]) != bitsOf(wantDx) {
				t.Errorf("n=%d: ReLUMask dx[%d] = %v, want %v", n, i, dx[i], wantDx)
			}
		}
	}
}

// TestSmallPickMemo checks that smallPick's memo never changes its answer:
// every (m, n) up to 70 asked twice of one shared memo (so slots are
// overwritten by colliding shapes) gives the answer of a fresh memo, and
// that answer has the least padded area over all the kernels (the rule in
// choose's doc, recomputed here by brute force).
func TestSmallPickMemo(t *testing.T) {
	ks := assembly(available64())
	if len(ks) == 0 {
		t.Skip("no assembly kernels in this build")
	}
	var shared pickMemo
	for round := range 2 {
		for m := 1; m <= 70; m++ {
			for n := 1; n <= 70; n++ {
				var fresh pickMemo
				want := smallPick(&fresh, ks, m, n)
				if got := smallPick(&shared, ks, m, n); got != want {
					t.Fatalf("round %d, m=%d n=%d: memo gives kernel %d, fresh %d", round, m, n, got, want)
				}
				least := -1
				for _, k := range ks {
					a := (m + k.mr - 1) / k.mr * k.mr * ((n + k.nr - 1) / k.nr * k.nr)
					if least < 0 || a < least {
						least = a
					}
				}
				k := ks[want]
				if a := (m + k.mr - 1) / k.mr * k.mr * ((n + k.nr - 1) / k.nr * k.nr); a != least {
					t.Fatalf("m=%d n=%d: picked %s with area %d, least is %d", m, n, kernelName(k), a, least)
				}
			}
		}
	}
}
