package optim

import (
	"math"
	"math/bits"

	"github.com/rhomb/rhomb/internal/kern"
	"github.com/rhomb/rhomb/net"
)

// The Gaussian numbers of the Langevin step.
//
// Each block of noiseBlock elements of a parameter has a seed s of its own
// (Trainer.update), and element j of the block takes the 64-bit word
//
//	u = splitMix(s + j·γ)        (γ = golden, the SplitMix64 increment)
//
// and turns it into a standard normal number by the ziggurat method with
// 1024 strips (Marsaglia & Tsang, "The Ziggurat Method for Generating
// Random Variables", Journal of Statistical Software 5(8), 2000): strip
// i = u & 1023, J = the high 32 bits of u as a signed integer, x = J·w_i,
// and x is the number when |J| < k_i, about 99.6% of draws. The rest fall
// in a wedge or the tail and are settled as the method says, with further
// words from a SplitMix64 sequence seeded with u (zigSlow). Element j
// depends on (s, j) alone, so the AVX-512 loop of internal/kern draws
// eight at a time (kern.NormalFast), the scalar normalAt is the same rule
// one at a time, and neither depends on how the work is split.

// golden is the SplitMix64 increment, ⌊2^64/φ⌋ rounded to odd (the
// constant splitMix adds).
const golden = 0x9e3779b97f4a7c15

// zigStrips is the number of strips, zigR the start of the tail and zigV
// the area of each strip under exp(−x²/2). For a given number of strips
// r is the one value for which the strips, built down from the tail,
// close at the top, and r fixes v = r·exp(−r²/2) + √(π/2)·erfc(r/√2)
// (the base strip with the tail). Both were found by bisection and the
// closed form, and TestZigguratStrips finds them again. 1024 strips
// rather than the 128 or 256 of Marsaglia & Tsang: the vector loop costs
// the same, and only 0.4% of draws take the slow scalar path (2.7% with
// 128), at 24 KiB of tables.
const (
	zigStrips = 1024
	zigR      = 4.0388498461095033
	zigV      = 1.2263246463530932e-3
)

// zigTables holds the ziggurat: for strip i, w[i] = x_i/2^31 (x_1023 = r
// the widest, x_0 the base strip's width with its tail folded in), k[i]
// = 2^31·x_{i−1}/x_i (the part of the strip under the curve for every y),
// f[i] = exp(−x_i²/2).
type zigTables struct {
	w, f [zigStrips]float64
	k    [zigStrips]int64
}

var zig = newZigTables(zigR, zigV)

// newZigTables builds the tables for tail start r and piece area v by the
// recursion of Marsaglia & Tsang (2000): each strip's top x_{i−1} solves
// x_i·(f(x_{i−1}) − f(x_i)) = v.
func newZigTables(r, v float64) *zigTables {
	const m = 1 << 31
	z := new(zigTables)
	dn, tn := r, r
	q := v / math.Exp(-0.5*dn*dn)
	z.k[0] = int64(dn / q * m)
	z.k[1] = 0
	z.w[0] = q / m
	z.w[zigStrips-1] = dn / m
	z.f[0] = 1
	z.f[zigStrips-1] = math.Exp(-0.5 * dn * dn)
	for i := zigStrips - 2; i >= 1; i-- {
		dn = math.Sqrt(-2 * math.Log(v/dn+math.Exp(-0.5*dn*dn)))
		z.k[i+1] = int64(dn / tn * m)
		tn = dn
		z.f[i] = math.Exp(-0.5 * dn * dn)
		z.w[i] = dn / m
	}
	return z
}

// normalAt is element j of the block with seed s.
func normalAt(s uint64, j int) float64 {
	u := wordAt(s, j)
	if x, _, _, ok := zigFast(u); ok {
		return x
	}
	return zigSlow(u)
}

// wordAt is the 64-bit word of element j of the block with seed s.
func wordAt(s uint64, j int) uint64 { return splitMix(s + uint64(j)*golden) }

// zigFast is the fast path for the word u: strip i, J the high 32 bits
// of u as a signed integer, x = J·w_i, and whether x is the number
// (|J| < k_i).
func zigFast(u uint64) (x float64, i uint64, J int64, ok bool) {
	i = u & (zigStrips - 1)
	J = int64(int32(u >> 32))
	return float64(J) * zig.w[i], i, J, abs64(J) < zig.k[i]
}

// zigSlow settles a draw u that the fast path did not take: the tail
// beyond r for strip 0, the wedge test for the others, and a fresh draw
// when the wedge test fails. Its further words are splitMix(u + n·γ),
// n = 1, 2, ….
func zigSlow(u uint64) float64 {
	c := u
	next := func() uint64 {
		c += golden
		return splitMix(c)
	}
	// unit is uniform on (0, 1), never 0, so its logarithm is finite.
	unit := func() float64 { return (float64(next()>>11) + 0.5) / (1 << 53) }
	for {
		x, i, J, ok := zigFast(u)
		if ok {
			return x
		}
		if i == 0 {
			for {
				x = -math.Log(unit()) / zigR
				y := -math.Log(unit())
				if y+y >= x*x {
					break
				}
			}
			if J > 0 {
				return zigR + x
			}
			return -zigR - x
		}
		// Each product rounded on its own (see stepScalar), so that
		// every build draws the same numbers.
		if zig.f[i]+float64(unit()*(zig.f[i-1]-zig.f[i])) < math.Exp(-0.5*x*x) {
			return x
		}
		u = next()
	}
}

func abs64(x int64) int64 {
	if x < 0 {
		return -x
	}
	return x
}

// fillNormals writes the block with seed s into dst (len(dst) ≤
// noiseBlock): the vector loop where there is one, the slow cases and the
// rest by the scalar rule.
func fillNormals(dst []float64, s uint64) {
	var miss [noiseBlock / 8]uint8
	done := kern.NormalFast(dst, s, &zig.w, &zig.k, miss[:])
	for b, m := range miss[:done/8] {
		for ; m != 0; m &= m - 1 {
			j := b*8 + bits.TrailingZeros8(m)
			dst[j] = zigSlow(wordAt(s, j))
		}
	}
	for j := done; j < len(dst); j++ {
		dst[j] = normalAt(s, j)
	}
}

// addNoise adds σ·xi[j] to val[j], the product and the sum each rounded
// in float64 and the sum rounded to T: the vector loop of internal/kern
// where there is one (kern.AddNoise, the same operations), this loop on
// the rest. It returns the first index whose new value is not finite, or
// −1.
func addNoise[T net.Float](val []T, xi []float64, sigma float64) int {
	done, nonFinite := kern.AddNoise(val, xi, sigma)
	bad := -1
	if nonFinite {
		bad = firstNotFinite(val[:done])
	}
	xi = xi[:len(val)]
	for j := done; j < len(val); j++ {
		nv := T(float64(val[j]) + float64(sigma*xi[j]))
		if notFinite(nv) && bad < 0 {
			bad = j
		}
		val[j] = nv
	}
	return bad
}
