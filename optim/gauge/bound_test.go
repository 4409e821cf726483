package gauge

import (
	"errors"
	"math"
	"math/rand/v2"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
)

// A tiny case worked by hand, the values evaluated with `bc -l` (30
// digits): margins {0.5, −0.1, 0.2, 1.0}, n = 4, γ = 0.4, δ = 0.1, B = 2,
// L = 2. Ramp loss (Φ_γ: 1 at ≤ 0, 1 − t/γ between): 0 + 1 + 0.5 + 0 over
// 4 = 0.375; fraction ≤ γ: 2/4. GRS: 2(√(2 ln 2·2) + 1)/√4 = 2√(ln 2) + 1 =
// 2.665109222315395512706329289790; binary factor 2/γ = 5, complexity
// 13.325546111576977563531646448950; confidence 3√(ln 20/8) =
// 1.835810123010612409782020223642; bound 15.536356234587589973313666672592.
// With 3 classes the factor is 4C/γ = 30: complexity 79.953276669461865381189878693700, bound
// 82.164086792472477790971898917342
// (Binary: Mohri, Rostamizadeh, Talwalkar, Foundations of Machine Learning,
// 2nd ed., Theorem 5.8; multi-class: Theorem 9.2; Golowich, Rakhlin and
// Shamir 2018, Theorem 1 — theorem numbers from memory.)
func TestMarginBoundWorked(t *testing.T) {
	m := []float64{0.5, -0.1, 0.2, 1.0}
	r, err := MarginBound(m, 2, 2, 2, true, BoundOptions{Gamma: 0.4, Delta: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	// A dozen float64 operations on values of order 10: 1e3·ε relative.
	tol := 1e3 * eps
	for _, c := range []struct {
		name      string
		got, want float64
	}{
		{"RampLoss", r.RampLoss, 0.375},
		{"FracBelow", r.FracBelow, 0.5},
		{"Rademacher", r.Rademacher, 2.665109222315395512706329289790},
		{"Complexity", r.Complexity, 13.325546111576977563531646448950},
		{"Confidence", r.Confidence, 1.835810123010612409782020223642},
		{"Bound", r.Bound, 15.536356234587589973313666672592},
	} {
		if math.Abs(c.got-c.want) > tol*math.Abs(c.want) {
			t.Errorf("%s = %.17g, want %.17g", c.name, c.got, c.want)
		}
	}
	r, err = MarginBound(m, 2, 2, 3, false, BoundOptions{Gamma: 0.4, Delta: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	if want := 82.164086792472477790971898917342; math.Abs(r.Bound-want) > tol*want {
		t.Errorf("3 classes: bound %.17g, want %.17g", r.Bound, want)
	}
}

// The bound is at least the empirical margin loss it starts from (the
// other terms are positive), and its excess over that loss falls as 1/√n:
// repeating the sample k times keeps the loss and divides the
// complexity and confidence terms by √k (both carry 1/√n in the theorem).
func TestMarginBoundScaling(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	base := make([]float64, 50)
	for i := range base {
		base[i] = rng.NormFloat64()*0.3 + 0.2
	}
	var prev *BoundReport
	for _, k := range []int{1, 4, 16, 64} {
		var m []float64
		for range k {
			m = append(m, base...)
		}
		r, err := MarginBound(m, 3, 3, 10, false, BoundOptions{Gamma: 0.1})
		if err != nil {
			t.Fatal(err)
		}
		if !(r.Bound >= r.RampLoss) || !(r.RampLoss <= r.FracBelow) {
			t.Errorf("k=%d: bound %v, ramp loss %v, fraction below %v", k, r.Bound, r.RampLoss, r.FracBelow)
		}
		if prev != nil {
			ratio := (prev.Bound - prev.RampLoss) / (r.Bound - r.RampLoss)
			// Exactly 2 for a factor 4 in n, up to the round-off of the
			// ramp loss's sum over up to 3200 terms (n·ε relative).
			if math.Abs(ratio-2) > 1e-12 {
				t.Errorf("k=%d: excess ratio %v, want 2 (1/√n)", k, ratio)
			}
			if math.Abs(r.RampLoss-prev.RampLoss) > float64(len(m))*eps {
				t.Errorf("k=%d: ramp loss changed %v → %v", k, prev.RampLoss, r.RampLoss)
			}
		}
		prev = r
	}
}

// For depth 1 the class {x ↦ w·x : ‖w‖ ≤ 1} has empirical Rademacher
// complexity E_σ‖Σσ_i x_i‖/n exactly (the supremum of a linear function
// over the unit ball, Cauchy–Schwarz). A Monte Carlo estimate of it must
// lie below the GRS bound B(√(2 ln 2) + 1)/√n.
func TestGRSAboveLinearRademacher(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 8))
	const n, d, draws = 40, 5, 4000
	x := make([]float64, n*d)
	b := 0.0
	for i := range n {
		s := 0.0
		for j := range d {
			x[i*d+j] = rng.NormFloat64()
			s += x[i*d+j] * x[i*d+j]
		}
		b = max(b, math.Sqrt(s))
	}
	var sum, sum2 float64
	for range draws {
		v := make([]float64, d)
		for i := range n {
			s := 1.0
			if rng.IntN(2) == 0 {
				s = -1
			}
			for j := range d {
				v[j] += s * x[i*d+j]
			}
		}
		r := math.Sqrt(dot(v, v)) / n
		sum += r
		sum2 += r * r
	}
	mc := sum / draws
	se := math.Sqrt((sum2/draws - mc*mc) / draws)
	if g := GRSRademacher(b, 1, n); mc-3*se > g { // 3 standard errors
		t.Errorf("Monte Carlo Rademacher %v ± %v exceeds the GRS bound %v", mc, se, g)
	}
}

// With a grid of K values of γ, each is taken at δ/K (union bound), so the
// chosen bound is at least the single-γ bound at the same γ and level δ.
func TestBestMarginBound(t *testing.T) {
	m := []float64{0.05, 0.1, 0.2, 0.3, -0.05, 0.4, 0.25, 0.15}
	grid := []float64{0.05, 0.1, 0.2, 0.4}
	best, err := BestMarginBound(m, 1, 2, 2, true, grid, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	one, _ := MarginBound(m, 1, 2, 2, true, BoundOptions{Gamma: best.Gamma, Delta: 0.05})
	if !(best.Bound > one.Bound) || best.Delta != 0.05 {
		t.Errorf("grid bound %v at γ=%v, single-γ bound %v", best.Bound, best.Gamma, one.Bound)
	}
	if _, err := MarginBound(m, 1, 2, 2, true, BoundOptions{}); err == nil {
		t.Error("γ = 0 accepted")
	}
}

// InputNorm sees the first dense layer's input: a constant feature adds 1
// to every squared norm, so the row (3, 4) has norm √26 there (worked by
// hand). A smooth rectifier is not positively homogeneous, and the GRS
// bound does not apply.
func TestInputNormAndHomogeneity(t *testing.T) {
	n, _ := net.NewBuilder[float64](2).ConstantFeature("one").Dense("h", 3).ReLU("r").Readout("out", 1).Build()
	_ = n.Init(net.InitSettings{Seed: 1})
	set := &data.Set[float64]{Rows: 2, Features: 2, Outputs: 1, X: []float64{3, 4, 1, 0}, Y: []float64{1, -1}}
	b, err := InputNorm[float64](n, set)
	if err != nil {
		t.Fatal(err)
	}
	if math.Abs(b-math.Sqrt(26)) > 4*eps*b {
		t.Errorf("B = %v, want √26", b)
	}
	r, err := BoundOf[float64](n, set, set, BoundOptions{Gamma: 0.1})
	if err != nil {
		t.Fatal(err)
	}
	if r.Depth != 2 || r.Classes != 2 || r.N != 2 || math.IsNaN(r.TestError) {
		t.Errorf("report %+v", r)
	}
	s, _ := net.NewBuilder[float64](2).Dense("h", 3).SmoothReLU("s", 4).Readout("out", 1).Build()
	_ = s.Init(net.InitSettings{Seed: 1})
	if _, err := InputNorm[float64](s, set); !errors.Is(err, ErrNotHomogeneous) {
		t.Errorf("smooth ReLU: err = %v, want ErrNotHomogeneous", err)
	}
}
