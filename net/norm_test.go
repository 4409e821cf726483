package net

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/floats"
)

// normTol is the relative error allowed between FrobeniusNorm and
// gonum's floats.Norm(·, 2) on n values: each sums n non-negative terms,
// with a relative error of at most γ_n ≈ n·u (Higham, Accuracy and
// Stability of Numerical Algorithms, 2nd ed., §3.1; from memory), plus
// the square root's half unit and the scaling's few roundings; the two
// differ by at most twice that. (n + 8)·2u covers it.
func normTol(n int) float64 { return float64(n+8) * 2 * 0x1p-53 }

// TestFrobeniusNormAgainstGonum checks the norm on random float64 vectors
// at magnitudes from near underflow to near overflow, where a plain sum
// of squares would lose everything, against gonum's scaled two-norm.
func TestFrobeniusNormAgainstGonum(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 14))
	for _, mag := range []float64{1e-300, 1e-200, 1e-160, 1e-120, 1e-3, 1, 1e3, 1e120, 1e160, 1e200, 1e300} {
		for _, n := range []int{1, 2, 3, 4, 5, 7, 8, 9, 31, 64, 1000} {
			v := make([]float64, n)
			for i := range v {
				v[i] = mag * rng.NormFloat64()
			}
			got, want := FrobeniusNorm(v), floats.Norm(v, 2)
			if math.Abs(got-want) > normTol(n)*want {
				t.Errorf("magnitude %g, %d values: %v, gonum %v (relative %.3g)", mag, n, got, want, math.Abs(got-want)/want)
			}
		}
	}
}

// TestFrobeniusNormFloat32 checks float32 vectors at float32's own
// extremes: the largest finite value and the smallest subnormal.
func TestFrobeniusNormFloat32(t *testing.T) {
	for _, c := range []struct {
		name string
		v    []float32
	}{
		{"largest", []float32{math.MaxFloat32, -math.MaxFloat32, 1}},
		{"smallest subnormal", []float32{math.SmallestNonzeroFloat32, math.SmallestNonzeroFloat32, 0, math.SmallestNonzeroFloat32}},
		{"mixed", []float32{3, 4, 1e-30, -12, 0.5}},
	} {
		w := make([]float64, len(c.v))
		for i, x := range c.v {
			w[i] = float64(x)
		}
		got, want := FrobeniusNorm(c.v), floats.Norm(w, 2)
		if math.Abs(got-want) > normTol(len(w))*want {
			t.Errorf("%s: %v, gonum %v", c.name, got, want)
		}
	}
	// 3-4-5 and 5-12-13 are exact.
	if got := FrobeniusNorm([]float32{3, 4, 12}); got != 13 {
		t.Errorf("‖(3, 4, 12)‖ = %v, want 13", got)
	}
}

// TestFrobeniusNormSpecial: zeros give 0, NaN gives NaN, an infinity +Inf.
func TestFrobeniusNormSpecial(t *testing.T) {
	if got := FrobeniusNorm(make([]float64, 9)); got != 0 {
		t.Errorf("zeros: %v", got)
	}
	if got := FrobeniusNorm([]float64(nil)); got != 0 {
		t.Errorf("empty: %v", got)
	}
	if got := FrobeniusNorm([]float64{1, math.NaN(), 2}); !math.IsNaN(got) {
		t.Errorf("with NaN: %v", got)
	}
	if got := FrobeniusNorm([]float32{1, float32(math.Inf(-1)), 2}); !math.IsInf(got, 1) {
		t.Errorf("with −Inf: %v", got)
	}
}
