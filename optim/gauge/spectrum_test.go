package gauge

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mat"

	"github.com/rhomb/rhomb/net"
)

// diag(3, 4) has Frobenius norm 5, so V = diag(0.6, 0.8) and σ = (0.8,
// 0.6). Effective rank (Roy and Vetterli 2007, from memory): p = (4/7,
// 3/7), exp(−Σp ln p) = 1.979626330052518341636875586756 (bc -l). Stable
// rank 1/0.8² = 1.5625.
func TestSpectrumWorked(t *testing.T) {
	s, err := SpectrumOf("d", []float64{3, 0, 0, 4}, 2, 2)
	if err != nil {
		t.Fatal(err)
	}
	// SVD of a 2×2 diagonal matrix: a few ulps (LAPACK-style backward
	// stability, ~10·ε relative).
	tol := 16 * eps
	if math.Abs(s.Values[0]-0.8) > tol || math.Abs(s.Values[1]-0.6) > tol {
		t.Errorf("σ = %v, want [0.8 0.6]", s.Values)
	}
	if math.Abs(s.EffectiveRank-1.979626330052518341636875586756) > 10*tol {
		t.Errorf("effective rank %.17g", s.EffectiveRank)
	}
	if math.Abs(s.StableRank-1.5625) > 10*tol {
		t.Errorf("stable rank %v", s.StableRank)
	}
}

// Roy and Vetterli's properties (from memory): the effective rank of a
// matrix with k equal non-zero singular values is k, and it is 1 for rank
// one; it is invariant to orthogonal transformations on either side
// (singular values are).
func TestEffectiveRankProperties(t *testing.T) {
	rng := rand.New(rand.NewPCG(9, 9))
	orth := func(n int) *mat.Dense {
		a := mat.NewDense(n, n, nil)
		for i := range n {
			for j := range n {
				a.Set(i, j, rng.NormFloat64())
			}
		}
		var qr mat.QR
		qr.Factorize(a)
		var q mat.Dense
		qr.QTo(&q)
		return &q
	}
	// U·diag(σ)·Vᵀ, 5×4, with σ = (2, 2, 2, 0): rank 3, all equal.
	build := func(sig []float64) []float64 {
		u, v := orth(5), orth(4)
		d := mat.NewDense(5, 4, nil)
		for i, s := range sig {
			d.Set(i, i, s)
		}
		var m mat.Dense
		m.Mul(u, d)
		m.Mul(&m, v.T())
		return mat.DenseCopyOf(&m).RawMatrix().Data
	}
	// A rotated matrix carries rounding of order ε·‖M‖ into every
	// singular value; 1e3·ε covers the products of 4×4 and 5×5 factors.
	tol := 1e3 * eps
	s, _ := SpectrumOf("equal", build([]float64{2, 2, 2, 0}), 5, 4)
	if math.Abs(s.EffectiveRank-3) > tol*3 {
		t.Errorf("three equal σ: effective rank %v, want 3", s.EffectiveRank)
	}
	sq := 0.0
	for _, v := range s.Values {
		sq += v * v
	}
	if math.Abs(sq-1) > tol { // ‖V‖_F = 1 after normalizing
		t.Errorf("Σσ² = %v, want 1", sq)
	}
	s, _ = SpectrumOf("one", build([]float64{5, 0, 0, 0}), 5, 4)
	// A zero singular value comes out at ~ε, entering the entropy as
	// −p ln p with p ~ ε: the rank exceeds 1 by about 3·ε·ln(1/ε).
	if math.Abs(s.EffectiveRank-1) > 1e-12 || math.Abs(s.StableRank-1) > tol {
		t.Errorf("rank one: effective rank %v, stable rank %v", s.EffectiveRank, s.StableRank)
	}
	s1, _ := SpectrumOf("a", build([]float64{3, 1, 0.5, 0.1}), 5, 4)
	s2, _ := SpectrumOf("b", build([]float64{3, 1, 0.5, 0.1}), 5, 4)
	if math.Abs(s1.EffectiveRank-s2.EffectiveRank) > tol*s1.EffectiveRank {
		t.Errorf("rotations changed the effective rank: %v vs %v", s1.EffectiveRank, s2.EffectiveRank)
	}
	if !math.IsNaN(EffectiveRank([]float64{0, 0})) {
		t.Error("all-zero spectrum should be NaN")
	}
}

func TestSpectraOfNetwork(t *testing.T) {
	n, _ := net.NewBuilder[float32](3).Dense("h", 4).ReLU("r").Readout("out", 2).Build()
	_ = n.Init(net.InitSettings{Seed: 2})
	sp, err := Spectra[float32](n)
	if err != nil {
		t.Fatal(err)
	}
	if len(sp) != 2 || sp[0].Layer != "h" || len(sp[0].Values) != 3 || len(sp[1].Values) != 2 {
		t.Fatalf("spectra %+v", sp)
	}
	for _, s := range sp {
		sq := 0.0
		for _, v := range s.Values {
			sq += v * v
		}
		// float32 weights: the norm is exact in float64 of the float32
		// values, so Σσ² = 1 to float64 round-off.
		if math.Abs(sq-1) > 1e3*eps {
			t.Errorf("%s: Σσ² = %v", s.Layer, sq)
		}
	}
}
