package arith_test

import (
	"math"
	"math/big"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/internal/arith"
)

// round64 rounds an exact big.Float to the nearest float64 (ties to even,
// big.Float's rule), the rounding of one IEEE 754 operation.
func round64(v *big.Float) float64 { f, _ := v.Float64(); return f }

func exact(v float64) *big.Float { return new(big.Float).SetPrec(300).SetFloat64(v) }

// TestBatchNormRowRule checks BatchNormRow against its documented rule
// computed with math/big, each operation exact in 300 bits and then
// rounded once: d = fl64(x − m), p = fl64(d·a), y = fl_T(fl64(p + s)).
// A multiply fused into the add (one rounding for d·a + s) or a missed
// rounding to T would differ in the last bit on some of these random
// operands. Also BatchNormFactor = fl64(γ / fl64(√fl64(v + ε))), with
// math.Sqrt correctly rounded (IEEE 754 requires it; from memory).
func TestBatchNormRowRule(t *testing.T) {
	rng := rand.New(rand.NewPCG(2, 3))
	const n = 2000
	for range n {
		x, m := rng.NormFloat64()*10, rng.NormFloat64()*10
		g, v, s := rng.NormFloat64(), rng.ExpFloat64(), rng.NormFloat64()
		sq := round64(new(big.Float).SetPrec(300).Sqrt(exact(round64(new(big.Float).SetPrec(300).Add(exact(v), exact(1e-5))))))
		a := round64(new(big.Float).SetPrec(300).Quo(exact(g), exact(sq)))
		if got := arith.BatchNormFactor(g, v, 1e-5); got != a {
			t.Fatalf("BatchNormFactor(%v, %v) = %v, want %v", g, v, got, a)
		}
		d := round64(new(big.Float).SetPrec(300).Sub(exact(x), exact(m)))
		p := round64(new(big.Float).SetPrec(300).Mul(exact(d), exact(a)))
		sum := new(big.Float).SetPrec(300).Add(exact(p), exact(s))
		want64 := round64(sum)
		y := []float64{0}
		arith.BatchNormRow([]float64{x}, y, []float64{m}, []float64{a}, []float64{s})
		if math.Float64bits(y[0]) != math.Float64bits(want64) {
			t.Fatalf("float64: x %v m %v a %v s %v: %v, want %v", x, m, a, s, y[0], want64)
		}
		x32 := float32(x)
		d = round64(new(big.Float).SetPrec(300).Sub(exact(float64(x32)), exact(m)))
		p = round64(new(big.Float).SetPrec(300).Mul(exact(d), exact(a)))
		want32, _ := exact(round64(new(big.Float).SetPrec(300).Add(exact(p), exact(s)))).Float32()
		y32 := []float32{0}
		arith.BatchNormRow([]float32{x32}, y32, []float64{m}, []float64{a}, []float64{s})
		if math.Float32bits(y32[0]) != math.Float32bits(want32) {
			t.Fatalf("float32: x %v m %v a %v s %v: %v, want %v", x32, m, a, s, y32[0], want32)
		}
	}
}
