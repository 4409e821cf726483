package calib

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestReliabilityHand(t *testing.T) {
	// Worked by hand, bins of width 1/4, b/4 ≤ c < (b+1)/4, c = 1 in the last:
	//   0 → bin 0; 0.25 → bin 1; 0.5 → bin 2; 0.99 and 1 → bin 3.
	//   bin 3: confidence (0.99 + 1)/2 = 0.995, accuracy 1/2.
	// ECE = (1·|1 − 0| + 1·|0 − 0.25| + 1·|1 − 0.5| + 2·|0.5 − 0.995|)/5
	//     = (1 + 0.25 + 0.5 + 0.99)/5 = 2.74/5 = 0.548 (Guo et al. 2017 definition).
	conf := []float64{0, 0.25, 0.5, 1, 0.99}
	correct := []bool{true, false, true, false, true}
	got := Reliability(conf, correct, 4)
	want := []Bin{
		{0, 0.25, 1, 0, 1},
		{0.25, 0.5, 1, 0.25, 0},
		{0.5, 0.75, 1, 0.5, 1},
		{0.75, 1, 2, 0.995, 0.5},
	}
	for b := range want {
		if got[b] != want[b] {
			t.Errorf("bin %d: %+v, want %+v", b, got[b], want[b])
		}
	}
	// A few roundings on values below 1: 4ε.
	if e := ECE(conf, correct, 4); math.Abs(e-0.548) > 4*0x1p-52 {
		t.Errorf("ECE = %.17g, want 0.548", e)
	}
	// An empty bin reports Rows 0 (documented zero values).
	if b := Reliability([]float64{0.9}, []bool{true}, 2)[0]; b.Rows != 0 || b.Confidence != 0 || b.Accuracy != 0 {
		t.Errorf("empty bin %+v", b)
	}
	if e := ECE(nil, nil, 10); !math.IsNaN(e) {
		t.Errorf("ECE of no rows = %v, want NaN", e)
	}
}

func TestECECalibrated(t *testing.T) {
	// Perfectly calibrated by construction: confidence c ~ U(0.5, 1) and the
	// answer right with probability c. Given the confidences, bin b's
	// accuracy minus confidence has mean 0 and standard deviation
	// sd_b = √(Σ c(1−c))/n_b (binomial sampling, independent across bins).
	// E|X| ≤ sd (Jensen), so E[ECE] ≤ Σ w_b·sd_b with w_b = n_b/n, and
	// Var(ECE) ≤ Σ w_b²·sd_b²; the bound is the mean bound plus 4 of those
	// standard deviations.
	const n, bins = 50000, 15
	rng := rand.New(rand.NewPCG(5, 6))
	conf := make([]float64, n)
	correct := make([]bool, n)
	for i := range conf {
		conf[i] = 0.5 + 0.5*rng.Float64()
		correct[i] = rng.Float64() < conf[i]
	}
	v := make([]float64, bins)
	for _, c := range conf {
		v[min(int(c*bins), bins-1)] += c * (1 - c)
	}
	var mean, variance float64
	for b, r := range Reliability(conf, correct, bins) {
		if r.Rows == 0 {
			continue
		}
		w := float64(r.Rows) / n
		sd := math.Sqrt(v[b]) / float64(r.Rows)
		mean += w * sd
		variance += w * w * sd * sd
	}
	bound := mean + 4*math.Sqrt(variance)
	e := ECE(conf, correct, bins)
	t.Logf("calibrated: ECE = %.4f, bound %.4f", e, bound)
	if e > bound {
		t.Errorf("ECE of calibrated rows = %.4f > sampling bound %.4f", e, bound)
	}
}

func TestECEKnownMiscalibration(t *testing.T) {
	// Confidence c ~ U(0.5, 1), right with probability c² (known by
	// construction). In every bin E[c] − E[c²] > 0, since c > c² on (0, 1),
	// so the population ECE is Σ_b P(b)·(E[c|b] − E[c²|b]) = E[c − c²]
	// = 3/4 − 7/12 = 1/6 for any binning (closed form: E[c] = 3/4,
	// E[c²] = 2∫_{1/2}^1 c² dc = 7/12). When every sample bin also has
	// confidence above accuracy, the sample ECE is exactly the mean of
	// c_i − y_i (the bin sums telescope), whose expectation is 1/6 and whose
	// standard error the test computes from the sample.
	const n, bins = 50000, 15
	rng := rand.New(rand.NewPCG(7, 8))
	conf := make([]float64, n)
	correct := make([]bool, n)
	var sum, sum2 float64
	for i := range conf {
		c := 0.5 + 0.5*rng.Float64()
		conf[i] = c
		correct[i] = rng.Float64() < c*c
		d := c
		if correct[i] {
			d--
		}
		sum += d
		sum2 += d * d
	}
	for _, b := range Reliability(conf, correct, bins) {
		if b.Rows > 0 && !(b.Confidence > b.Accuracy) {
			t.Fatalf("precondition: bin %+v has accuracy at or above confidence", b)
		}
	}
	m := sum / n
	se := math.Sqrt((sum2/n - m*m) / (n - 1))
	e := ECE(conf, correct, bins)
	t.Logf("p = c²: ECE = %.4f, closed form 1/6 = %.4f, se %.4f", e, 1.0/6, se)
	if d := math.Abs(e - 1.0/6); d > 4*se {
		t.Errorf("ECE = %.4f, closed form 1/6: off by %.4f > 4 se = %.4f", e, d, 4*se)
	}
}
