package optim

import (
	"math"
	"sort"
	"testing"

	"github.com/rhomb/rhomb/net"
	"gonum.org/v1/gonum/stat/distuv"
)

// TestZigguratStrips checks the tables against the closed forms they are
// built to satisfy (Marsaglia & Tsang 2000), with f(x) = exp(−x²/2):
// every strip i = 2 … 1023 has area x_i·(f(x_{i−1}) − f(x_i)) = v, the base
// strip with its tail r·f(r) + ∫_r^∞ f = r·f(r) + √(π/2)·erfc(r/√2) = v
// (math.Erfc), and r is the tail start for which the recursion closes:
// the top strip x_1·(1 − f(x_1)) has area v too.
//
// The middle strips are solved one from the next in closed form, so they
// hold to rounding: 1022 steps of a few operations each; 1e-12 relative
// is a regression guard. The base strip is one closed form, which v
// copies to 17 digits (1e-15 relative). The closing r is found here by
// bisection (the top strip's area falls from above v to below it as r
// falls) and must agree with the constant to 1e-12.
func TestZigguratStrips(t *testing.T) {
	f := func(x float64) float64 { return math.Exp(-x * x / 2) }
	x := func(z *zigTables, i int) float64 { return z.w[i] * (1 << 31) }
	for i := 2; i < zigStrips; i++ {
		a := x(zig, i) * (zig.f[i-1] - zig.f[i])
		if rel := math.Abs(a-zigV) / zigV; rel > 1e-12 {
			t.Errorf("strip %d: area %.15g, want %.15g (relative error %.2g)", i, a, zigV, rel)
		}
		if math.Abs(zig.f[i]-f(x(zig, i))) > 1e-15 {
			t.Errorf("strip %d: f = %.17g, want exp(-x²/2) = %.17g", i, zig.f[i], f(x(zig, i)))
		}
	}
	baseArea := func(r float64) float64 { return r*f(r) + math.Sqrt(math.Pi/2)*math.Erfc(r/math.Sqrt2) }
	if rel := math.Abs(baseArea(zigR)-zigV) / zigV; rel > 1e-15 {
		t.Errorf("base strip with its tail: area %.15g, want %.15g", baseArea(zigR), zigV)
	}
	topGap := func(r float64) float64 {
		v := baseArea(r)
		z := newZigTables(r, v)
		return x(z, 1)*(1-z.f[1]) - v
	}
	lo, hi := 4.03, 4.05
	// Below the root the top strip's area falls under v, and a little
	// lower the recursion runs out of curve (a NaN); either counts as
	// below.
	below := func(r float64) bool { return !(topGap(r) >= 0) }
	if !below(lo) || below(hi) {
		t.Fatalf("the top strip's gap does not change sign over [%g, %g]", lo, hi)
	}
	for range 100 {
		mid := (lo + hi) / 2
		if below(mid) {
			lo = mid
		} else {
			hi = mid
		}
	}
	if math.Abs(lo-zigR) > 1e-12 {
		t.Errorf("the recursion closes at r = %.15g, published %.13g", lo, zigR)
	}
	// The fast path's bounds: k_i/2^31 = x_{i−1}/x_i for i ≥ 2.
	for i := 2; i < zigStrips; i++ {
		want := x(zig, i-1) / x(zig, i) * (1 << 31)
		if math.Abs(float64(zig.k[i])-want) > 1 {
			t.Errorf("strip %d: k = %d, want ⌊%.1f⌋", i, zig.k[i], want)
		}
	}
}

// TestNormalsSameBits checks fillNormals (the AVX-512 loop of
// internal/kern where the processor has one, the scalar rule on the slow
// cases and the tail) against normalAt, the rule one element at a time,
// bit for bit: every block length from 0 to 67 and a whole block, over
// many seeds, so that slow cases (about 1.2% of draws) fall at every lane;
// nothing beyond the block is written.
func TestNormalsSameBits(t *testing.T) {
	lengths := []int{noiseBlock, noiseBlock - 1}
	for n := range 68 {
		lengths = append(lengths, n)
	}
	buf := make([]float64, noiseBlock)
	slow := 0
	for s := range uint64(300) {
		seed := splitMix(s ^ 0x5eed)
		for _, n := range lengths {
			for j := range buf {
				buf[j] = math.NaN()
			}
			dst := buf[:n]
			fillNormals(dst, seed)
			for j := n; j < len(buf); j++ {
				if !math.IsNaN(buf[j]) {
					t.Fatalf("seed %#x, length %d: element %d beyond the block written", seed, n, j)
				}
			}
			for j, got := range dst {
				if want := normalAt(seed, j); math.Float64bits(got) != math.Float64bits(want) {
					t.Fatalf("seed %#x, length %d, element %d: %v, want %v", seed, n, j, got, want)
				}
			}
		}
		for j := range noiseBlock {
			if _, _, _, fast := zigFast(wordAt(seed, j)); !fast {
				slow++
			}
		}
	}
	if slow < 1000 {
		t.Fatalf("only %d slow draws: the check did not reach them", slow)
	}
}

// TestNormalsDistribution draws 2^22 numbers block after block, as the
// trainer does, and checks them against the standard normal law (gonum
// stat/distuv.UnitNormal):
//   - the Kolmogorov–Smirnov distance is below 1.9495/√n, the asymptotic
//     0.001 critical value (Kolmogorov's limit law; common practice, no
//     source for the digits, which are from memory);
//   - a chi-square over 64 equiprobable cells is below the 0.999 quantile
//     of chi-square with 63 degrees of freedom (distuv.ChiSquared);
//   - the counts beyond the tail start r (drawn by the tail rule) and
//     beyond 3 are within 5 binomial standard deviations of
//     n·erfc(t/√2);
//   - the mean of x⁴ is within 5·√(96/n) of 3 (E x⁴ = 3, Var x⁴ = 105 − 9).
func TestNormalsDistribution(t *testing.T) {
	const blocks = 1 << 12
	n := blocks * noiseBlock
	xs := make([]float64, n)
	for b := range blocks {
		fillNormals(xs[b*noiseBlock:(b+1)*noiseBlock], splitMix(uint64(b)^0xb10c))
	}
	nf := float64(n)
	var m4 float64
	for _, x := range xs {
		m4 += x * x * x * x
	}
	m4 /= nf
	if tol := 5 * math.Sqrt(96/nf); math.Abs(m4-3) > tol {
		t.Errorf("mean of x⁴ %.5f, want 3 ± %.4f", m4, tol)
	}
	for _, cut := range []float64{3, zigR} {
		count := 0
		for _, x := range xs {
			if math.Abs(x) > cut {
				count++
			}
		}
		p := math.Erfc(cut / math.Sqrt2)
		mu, sd := nf*p, math.Sqrt(nf*p*(1-p))
		if math.Abs(float64(count)-mu) > 5*sd {
			t.Errorf("|x| > %.3f: %d draws, want %.0f ± %.0f", cut, count, mu, 5*sd)
		}
	}
	const cells = 64
	var counts [cells]int
	norm := distuv.UnitNormal
	for _, x := range xs {
		c := int(norm.CDF(x) * cells)
		counts[min(c, cells-1)]++
	}
	chi2 := 0.0
	for _, c := range counts {
		d := float64(c) - nf/cells
		chi2 += d * d / (nf / cells)
	}
	if crit := (distuv.ChiSquared{K: cells - 1}).Quantile(0.999); chi2 > crit {
		t.Errorf("chi-square over %d cells %.1f, above the 0.999 quantile %.1f", cells, chi2, crit)
	}
	sort.Float64s(xs)
	d := 0.0
	for i, x := range xs {
		c := norm.CDF(x)
		d = math.Max(d, math.Max(math.Abs(float64(i+1)/nf-c), math.Abs(c-float64(i)/nf)))
	}
	if crit := 1.9495 / math.Sqrt(nf); d > crit {
		t.Errorf("Kolmogorov–Smirnov distance %.5f, above the 0.001 critical value %.5f", d, crit)
	}
}

// TestAddNoiseSameBits checks addNoise (kern.AddNoise where the processor
// has the vector unit) against the scalar rule, float32 and float64, every
// length to 67, with values that overflow when the noise is added; the
// first non-finite index must agree too.
func TestAddNoiseSameBits(t *testing.T) {
	addNoiseBits[float32](t)
	addNoiseBits[float64](t)
}

func addNoiseBits[T net.Float](t *testing.T) {
	for n := range 68 {
		for _, huge := range []bool{false, true} {
			val, xi := make([]T, n), make([]float64, n)
			for j := range val {
				val[j] = T(normalAt(uint64(n), j))
				xi[j] = normalAt(uint64(n)+1000, j)
				if huge && j%7 == 3 {
					top := math.MaxFloat64
					if _, ok := any(val[j]).(float32); ok {
						top = math.MaxFloat32
					}
					val[j] = T(top)
					xi[j] = math.Abs(xi[j])
				}
			}
			sigma := 0.3
			if huge {
				sigma = 1e300
			}
			want := append([]T(nil), val...)
			wantBad := -1
			for j := range want {
				want[j] = T(float64(want[j]) + float64(sigma*xi[j]))
				if notFinite(want[j]) && wantBad < 0 {
					wantBad = j
				}
			}
			if got := addNoise(val, xi, sigma); got != wantBad {
				t.Fatalf("%T n=%d: first bad %d, want %d", val, n, got, wantBad)
			}
			for j := range val {
				if !sameBits(val[j], want[j]) {
					t.Fatalf("%T n=%d [%d]: %v, want %v", val, n, j, val[j], want[j])
				}
			}
		}
	}
}

// BenchmarkNormals measures one block of Gaussian numbers, the vector loop
// with the slow cases (ns/op over noiseBlock numbers).
func BenchmarkNormals(b *testing.B) {
	buf := make([]float64, noiseBlock)
	for i := 0; b.Loop(); i++ {
		fillNormals(buf, uint64(i))
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*noiseBlock), "ns/number")
}
