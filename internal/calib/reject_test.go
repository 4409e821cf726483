package calib

import (
	"math"
	"math/rand/v2"
	"testing"

	"gonum.org/v1/gonum/mathext"
	"gonum.org/v1/gonum/stat/distuv"
)

func TestRejectThresholdHand(t *testing.T) {
	// Worked by hand. Rows by falling margin, ✓ right, ✗ wrong, and the
	// error rate among the rows at or above each margin:
	//   0.9 ✓ 0/1 · 0.8 ✓ 0/2 · 0.7 ✗ 1/3 · 0.6 ✓ 1/4 · 0.5 ✓ 1/5
	//   0.4 ✗ 2/6 · 0.3 ✗ 3/7 · 0.2 ✓ 3/8
	// target 0.25: 0.9, 0.8, 0.6 (1/4), 0.5 (1/5) qualify → τ = 0.5, 5/8
	// target 0.2:  0.6 (1/4) does not but 0.5 (1/5) does → τ = 0.5, 5/8
	// target 0.4:  0.2 (3/8 = 0.375) qualifies → τ = 0.2, all rows
	// target 0:    0.8 is the last with no error → τ = 0.8, 2/8
	margins := []float64{0.5, 0.9, 0.3, 0.8, 0.2, 0.7, 0.6, 0.4}
	correct := []bool{true, true, false, true, true, false, true, false}
	for _, c := range []struct{ target, tau, answered float64 }{
		{0.25, 0.5, 0.625}, {0.2, 0.5, 0.625}, {0.4, 0.2, 1}, {0, 0.8, 0.25},
	} {
		tau, ans := RejectThreshold(margins, correct, c.target)
		if tau != c.tau || ans != c.answered {
			t.Errorf("target %v: τ = %v, answered %v; want %v, %v", c.target, tau, ans, c.tau, c.answered)
		}
	}
	// Ties are answered together (worked by hand): margins 1, 1, 1, 0.5
	// with one error among the 1s: 1/3 at τ = 1, 1/4 at τ = 0.5.
	tm := []float64{1, 1, 1, 0.5}
	tc := []bool{true, false, true, true}
	for _, c := range []struct{ target, tau, answered float64 }{
		{0.34, 0.5, 1}, {0.3, 0.5, 1}, {0.2, math.Inf(1), 0},
	} {
		tau, ans := RejectThreshold(tm, tc, c.target)
		if tau != c.tau || ans != c.answered {
			t.Errorf("ties, target %v: τ = %v, answered %v; want %v, %v", c.target, tau, ans, c.tau, c.answered)
		}
	}
	// A decimal target met exactly: 29 errors in 100 rows at target 0.29
	// (0.29·100 rounds to 28.999999999999996 in float64; arithmetic).
	m := make([]float64, 100)
	ok := make([]bool, 100)
	for i := range ok {
		m[i], ok[i] = 1, i >= 29
	}
	if tau, ans := RejectThreshold(m, ok, 0.29); tau != 1 || ans != 1 {
		t.Errorf("29 errors in 100 at target 0.29: τ = %v, answered %v; want 1, 1", tau, ans)
	}
	if tau, ans := RejectThreshold(nil, nil, 0.1); !math.IsInf(tau, 1) || ans != 0 {
		t.Errorf("no rows: τ = %v, answered %v; want +Inf, 0", tau, ans)
	}
}

func TestRejectThresholdBruteForce(t *testing.T) {
	// Property against a direct O(n²) search of the documented rule: for
	// each distinct margin τ, count the rows with margin ≥ τ and their
	// errors; keep the smallest τ with errors ≤ target·rows (with the
	// documented 1e−12 allowance). Random rows with many ties.
	rng := rand.New(rand.NewPCG(21, 22))
	for trial := range 500 {
		n := rng.IntN(40)
		margins := make([]float64, n)
		correct := make([]bool, n)
		for i := range margins {
			margins[i] = float64(rng.IntN(12)) / 4
			correct[i] = rng.Float64() < 0.4+margins[i]/5
		}
		for _, target := range []float64{0, 0.05, 0.1, 0.2, 0.25, 1.0 / 3, 0.5, 1} {
			wantTau, wantAns := math.Inf(1), 0.0
			for _, tau := range margins {
				rows, wrong := 0, 0
				for i, m := range margins {
					if m >= tau {
						rows++
						if !correct[i] {
							wrong++
						}
					}
				}
				if float64(wrong) <= target*float64(rows)*(1+1e-12) && tau < wantTau {
					wantTau, wantAns = tau, float64(rows)/float64(n)
				}
			}
			tau, ans := RejectThreshold(margins, correct, target)
			if tau != wantTau || ans != wantAns {
				t.Fatalf("trial %d, target %v: τ = %v, answered %v; brute force %v, %v", trial, target, tau, ans, wantTau, wantAns)
			}
		}
	}
}

func TestRegIncBeta(t *testing.T) {
	// Against gonum's mathext.RegIncBeta. Both evaluate the same function
	// to about ε per operation; the prefactor exp(lgamma(a+b) − lgamma(a) −
	// lgamma(b) + a·log x + b·log y) carries an absolute error of about ε
	// times the sum of the magnitudes of its terms, which becomes a
	// relative error of the result; the tolerance is that sum times 16ε,
	// plus 1e−15 for the continued fraction's stopping rule (|Δ−1| < 1e−15).
	for _, a := range []float64{0.5, 1, 3, 40, 1000, 20000} {
		for _, b := range []float64{0.5, 1, 2, 25, 900, 30000} {
			for _, x := range []float64{1e-6, 0.01, 0.2, 0.5, 0.7, 0.97, 0.999999} {
				got := regIncBeta(a, b, x, 1-x)
				want := mathext.RegIncBeta(a, b, x)
				tol := (prefactorMag(a, b, x)*16*0x1p-52 + 1e-15) * max(want, 1-want)
				if math.Abs(got-want) > tol {
					t.Errorf("I_%v(%v, %v) = %.17g, gonum %.17g, differ by %.3g > %.3g", x, a, b, got, want, math.Abs(got-want), tol)
				}
			}
		}
	}
}

// prefactorMag is the sum of the magnitudes of the terms in the exponent
// of the incomplete beta function's prefactor, exp(lgamma(a+b) − lgamma(a)
// − lgamma(b) + a·log x + b·log(1−x)): ε times it bounds, to a small
// factor, the relative rounding error of the prefactor (arithmetic).
func prefactorMag(a, b, x float64) float64 {
	la, _ := math.Lgamma(a)
	lb, _ := math.Lgamma(b)
	lab, _ := math.Lgamma(a + b)
	return math.Abs(la) + math.Abs(lb) + math.Abs(lab) + math.Abs(a*math.Log(x)) + math.Abs(b*math.Log1p(-x))
}

func TestErrorUpperBound(t *testing.T) {
	// The one-sided Clopper–Pearson upper bound after e errors in m rows is
	// the confidence-quantile of Beta(e+1, m−e) (Clopper and Pearson 1934;
	// the beta form from memory), here from gonum's distuv.Beta. For e = 0
	// it is 1 − (1−confidence)^{1/m} = −expm1(log(1−confidence)/m) (closed
	// form). The tolerance: the binomial tail P(X ≤ e | u) =
	// I_{1−u}(m−e, e+1) is computed to the relative error bounded in
	// TestRegIncBeta, r = prefactorMag·16ε + 1e−15, on each side (ours and
	// gonum's); a tail error r·δ (δ = 1 − confidence, the tail's value at
	// the root) moves the root by r·δ/|d tail/du|, the derivative being the
	// Beta(e+1, m−e) density at u (from memory); plus 4ε·u for the
	// bisection's last step and rounding.
	for _, m := range []int{1, 5, 20, 100, 1000, 10000} {
		for _, e := range []int{0, 1, m / 10, m / 2, m - 1} {
			if e < 0 || e >= m {
				continue
			}
			for _, conf := range []float64{0.9, 0.95, 0.99} {
				got := ErrorUpperBound(e, m, conf)
				beta := distuv.Beta{Alpha: float64(e + 1), Beta: float64(m - e)}
				want := beta.Quantile(conf)
				r := prefactorMag(float64(m-e), float64(e+1), 1-want)*16*0x1p-52 + 1e-15
				tol := 2*r*(1-conf)/beta.Prob(want) + 4*0x1p-52*want
				if e == 0 {
					closed := -math.Expm1(math.Log(1-conf) / float64(m))
					if math.Abs(got-closed) > tol {
						t.Errorf("0 errors in %d at %v: bound %.15g, closed form %.15g", m, conf, got, closed)
					}
				}
				if math.Abs(got-want) > tol {
					t.Errorf("%d errors in %d at %v: bound %.15g, gonum Beta quantile %.15g, differ by %.3g > %.3g", e, m, conf, got, want, math.Abs(got-want), tol)
				}
			}
		}
	}
	if got := ErrorUpperBound(3, 3, 0.95); got != 1 {
		t.Errorf("all wrong: bound %v, want 1", got)
	}
}

func TestRejectThresholdBound(t *testing.T) {
	// Worked by hand: 100 rows with falling distinct margins, the top 60
	// right and the other 40 wrong; target 0.05 at confidence 0.95. With 0
	// errors in m rows the Clopper–Pearson bound is 1 − 0.05^{1/m} (closed
	// form), ≤ 0.05 exactly when m ≥ log 0.05/log 0.95 = 58.4, so m = 59 and
	// 60 qualify; with 1 error in 61 rows, P(X ≤ 1 | p = 0.05) = 0.95⁶¹ +
	// 61·0.05·0.95⁶⁰ ≈ 0.184 > 0.05, and more errors only raise the bound.
	// So τ is the 60th margin and 60% are answered, where RejectThreshold
	// (plain rate 0/60 … 3/63 = 0.048 ≤ 0.05, 4/64 > 0.05) answers 63.
	margins := make([]float64, 100)
	correct := make([]bool, 100)
	for i := range margins {
		margins[i] = float64(100 - i)
		correct[i] = i < 60
	}
	if tau, ans := RejectThresholdBound(margins, correct, 0.05, 0.95); tau != 41 || ans != 0.6 {
		t.Errorf("bound: τ = %v, answered %v; want 41, 0.6", tau, ans)
	}
	if tau, ans := RejectThreshold(margins, correct, 0.05); tau != 38 || ans != 0.63 {
		t.Errorf("plain: τ = %v, answered %v; want 38, 0.63", tau, ans)
	}
	// Too few rows to vouch for the target: nothing answered.
	if tau, ans := RejectThresholdBound(margins[:50], correct[:50], 0.05, 0.95); !math.IsInf(tau, 1) || ans != 0 {
		t.Errorf("50 right rows: τ = %v, answered %v; want +Inf, 0", tau, ans)
	}
}
