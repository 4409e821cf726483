package arith

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestFMAChainsAreFMA32 checks the processor's single-precision
// multiply-add loops (fmaChain32, fmaChain32x4) against FMA32, which
// TestFMA32 checks against math/big, bit for bit: on random values of
// every magnitude float32 has, subnormals and signed zeros among them,
// and on sums that cancel exactly.
func TestFMAChainsAreFMA32(t *testing.T) {
	if !hasFMA {
		t.Skip("no FMA instructions on this processor (or a noasm build): dot32 runs FMA32 itself")
	}
	rng := rand.New(rand.NewPCG(7, 11))
	value := func() float32 {
		switch rng.IntN(8) {
		case 0:
			return float32(math.Copysign(0, rng.NormFloat64()))
		case 1:
			return float32(rng.NormFloat64() * 1e-41) // subnormal
		case 2:
			return float32(rng.NormFloat64() * 1e18) // products near float32's top
		default:
			return float32(rng.NormFloat64() * math.Pow(2, float64(rng.IntN(60)-30)))
		}
	}
	same := func(a, b float32) bool { return math.Float32bits(a) == math.Float32bits(b) }
	for trial := range 2000 {
		n := rng.IntN(40)
		const stride = 43
		x, w := make([]float32, max(n, 1)), make([]float32, 4*stride)
		for i := range x {
			x[i] = value()
		}
		for i := range w {
			w[i] = value()
		}
		if trial%5 == 0 && n >= 2 {
			// x0·w0 + x1·w1 = 0 exactly: the sum's sign comes from the
			// rounding rule.
			w[1] = -w[0]
			x[1] = x[0]
		}
		var want [4]float32
		for r := range 4 {
			for l := range n {
				want[r] = FMA32(x[l], w[r*stride+l], want[r])
			}
		}
		if n == 0 {
			continue
		}
		if got := fmaChain32(&x[0], &w[0], n, 0); !same(got, want[0]) {
			t.Fatalf("trial %d, %d terms: fmaChain32 %v (%#x), FMA32 %v (%#x)", trial, n, got, math.Float32bits(got), want[0], math.Float32bits(want[0]))
		}
		start := value()
		chained := start
		for l := range n {
			chained = FMA32(x[l], w[l], chained)
		}
		if got := fmaChain32(&x[0], &w[0], n, start); !same(got, chained) {
			t.Fatalf("trial %d, from %v: fmaChain32 %v, FMA32 %v", trial, start, got, chained)
		}
		var got [4]float32
		fmaChain32x4(&x[0], &w[0], n, stride, &got)
		for r := range 4 {
			if !same(got[r], want[r]) {
				t.Fatalf("trial %d, %d terms, row %d: fmaChain32x4 %v, FMA32 %v", trial, n, r, got[r], want[r])
			}
		}
	}
}
