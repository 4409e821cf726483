package calib

import (
	"github.com/rhomb/rhomb/internal/arith"
	"math"
	"math/big"
	"math/rand/v2"
	"slices"
	"testing"
)

func TestConformalThresholdHand(t *testing.T) {
	// The rank rule of Angelopoulos and Bates 2021 (arXiv:2107.07511, §1):
	// q̂ is the ⌈(n+1)(1−α)⌉-th smallest score. Worked by hand for n = 9:
	//   α = 0.5:  10·0.5  = 5   → 5th smallest = 0.5
	//   α = 0.35: 10·0.65 = 6.5 → 7th          = 0.7
	//   α = 0.2:  10·0.8  = 8   → 8th          = 0.8
	//   α = 0.1:  10·0.9  = 9   → 9th          = 0.9
	//   α = 0.05: 10·0.95 = 9.5 → 10th > n     = +Inf
	non := []float64{0.9, 0.1, 0.5, 0.3, 0.7, 0.2, 0.8, 0.4, 0.6}
	for _, c := range []struct{ alpha, want float64 }{
		{0.5, 0.5}, {0.35, 0.7}, {0.2, 0.8}, {0.1, 0.9}, {0.05, math.Inf(1)},
	} {
		if got := ConformalThreshold(non, c.alpha); got != c.want {
			t.Errorf("α = %v: q̂ = %v, want %v", c.alpha, got, c.want)
		}
	}
	if got := ConformalThreshold(nil, 0.1); !math.IsInf(got, 1) {
		t.Errorf("no rows: q̂ = %v, want +Inf", got)
	}
	if !slices.Equal(non, []float64{0.9, 0.1, 0.5, 0.3, 0.7, 0.2, 0.8, 0.4, 0.6}) {
		t.Error("ConformalThreshold reordered its input")
	}
}

func TestConformalRankExact(t *testing.T) {
	// The rank ⌈(n+1)(1−α)⌉ for decimal α = j/100, computed exactly in
	// rational arithmetic (math/big), against the rank ConformalThreshold
	// picks (scores 1..n, so q̂ is the rank itself).
	for n := 1; n <= 250; n++ {
		non := make([]float64, n)
		for i := range non {
			non[n-1-i] = float64(i + 1)
		}
		for j := 1; j <= 99; j++ {
			x := new(big.Rat).SetFrac64(int64((n+1)*(100-j)), 100)
			r := new(big.Int).Quo(x.Num(), x.Denom()) // floor
			if !x.IsInt() {
				r.Add(r, big.NewInt(1))
			}
			want := math.Inf(1)
			if r.Int64() <= int64(n) {
				want = float64(r.Int64())
			}
			if got := ConformalThreshold(non, float64(j)/100); got != want {
				t.Fatalf("n = %d, α = %d/100: q̂ = %v, exact rank rule gives %v", n, j, got, want)
			}
		}
	}
}

func TestSet(t *testing.T) {
	// Worked by hand (binary-exact probabilities): 1 − p = (0.5, 0.625, 0.875).
	p := []float64{0.5, 0.375, 0.125}
	for _, c := range []struct {
		q    float64
		want []int
	}{
		{0.625, []int{0, 1}}, // the boundary is in the set (1 − p ≤ q̂)
		{0.5, []int{0}},
		{0.4, []int{}},
		{math.Inf(1), []int{0, 1, 2}},
	} {
		if got := Set(p, c.q, nil); !slices.Equal(got, c.want) && !(len(got) == 0 && len(c.want) == 0) {
			t.Errorf("q̂ = %v: set %v, want %v", c.q, got, c.want)
		}
	}
	if got := Nonconformity(p, 3, []int{1}, nil); len(got) != 1 || got[0] != 0.625 {
		t.Errorf("Nonconformity = %v, want [0.625]", got)
	}
}

func TestConformalCoverage(t *testing.T) {
	// A known 3-class model: logits z ~ N(0, 1.5²) per class, true
	// probabilities softmax(z), labels drawn from them; the model's
	// probabilities are softmax(z/2), deliberately miscalibrated (the
	// guarantee needs no calibration). For each of 300 seeds: n = 200
	// calibration rows give q̂ at α = 0.1, and 500 fresh rows measure the
	// coverage of the sets.
	//
	// Vovk, Gammerman and Shafer 2005 (also Angelopoulos and Bates 2021,
	// §1 and Appendix D): for exchangeable rows with continuous scores the
	// coverage averaged over calibration sets is exactly r/(n+1) with
	// r = ⌈(n+1)(1−α)⌉ = 181, which lies in [1−α, 1−α + 1/(n+1)]. The mean
	// over seeds is checked against both within 3 standard errors,
	// se = sd(coverage over seeds)/√seeds, computed here.
	const (
		seeds, n, m, k = 300, 200, 500, 3
		alpha          = 0.1
	)
	draw := func(rng *rand.Rand, rows int) (probs []float64, labels []int) {
		z := make([]float64, k)
		truth := make([]float64, k)
		probs = make([]float64, rows*k)
		labels = make([]int, rows)
		for i := range labels {
			for j := range z {
				z[j] = 1.5 * rng.NormFloat64()
			}
			arith.Softmax(z, 1, truth)
			arith.Softmax(z, 2, probs[i*k:(i+1)*k])
			u, c := rng.Float64(), 0
			for c < k-1 && u >= truth[c] {
				u -= truth[c]
				c++
			}
			labels[i] = c
		}
		return probs, labels
	}
	cover := make([]float64, seeds)
	var set []int
	for s := range seeds {
		rng := rand.New(rand.NewPCG(11, uint64(s)))
		cp, cl := draw(rng, n)
		q := ConformalThreshold(Nonconformity(cp, k, cl, nil), alpha)
		tp, tl := draw(rng, m)
		hit := 0
		for i, y := range tl {
			set = Set(tp[i*k:(i+1)*k], q, set[:0])
			if slices.Contains(set, y) {
				hit++
			}
		}
		cover[s] = float64(hit) / m
	}
	var mean, ss float64
	for _, c := range cover {
		mean += c
	}
	mean /= seeds
	for _, c := range cover {
		ss += (c - mean) * (c - mean)
	}
	se := math.Sqrt(ss / (seeds - 1) / seeds)
	exact := 181.0 / 201
	t.Logf("mean coverage %.4f over %d seeds (se %.4f); exact %.4f, interval [%.4f, %.4f]", mean, seeds, se, exact, 1-alpha, 1-alpha+1.0/(n+1))
	if lo, hi := 1-alpha-3*se, 1-alpha+1.0/(n+1)+3*se; mean < lo || mean > hi {
		t.Errorf("mean coverage %.4f outside [%.4f, %.4f]", mean, lo, hi)
	}
	if d := math.Abs(mean - exact); d > 3*se {
		t.Errorf("mean coverage %.4f, exact r/(n+1) = %.4f: off by %.4f > 3 se = %.4f", mean, exact, d, 3*se)
	}
}
