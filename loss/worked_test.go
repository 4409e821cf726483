package loss_test

import (
	"math"
	"testing"

	"github.com/rhomb/rhomb/loss"
)

// exactTol is for results that are a few float64 operations from values
// computed by hand: each operation rounds by at most ε = 2⁻⁵² ≈ 2.2e-16
// relative, and these take fewer than twenty, so 1e-14 relative (absolute
// near 0) leaves a margin of about twenty while a wrong term is off by far
// more.
const exactTol = 1e-14

func near(got, want, tol float64) bool {
	return math.Abs(got-want) <= tol*max(1, math.Abs(want))
}

// checkEval runs f64 on a hand-worked batch and compares value and gradient.
func checkEval(t *testing.T, f loss.Func[float64], out, y []float64, rows, cols int, want float64, wantGrad []float64) {
	t.Helper()
	grad := make([]float64, rows*cols)
	got := f.Eval(out, y, rows, cols, grad)
	if !near(got, want, exactTol) {
		t.Errorf("%s: Eval = %.17g, want %.17g", f.Name(), got, want)
	}
	for i := range grad {
		if !near(grad[i], wantGrad[i], exactTol) {
			t.Errorf("%s: grad[%d] = %.17g, want %.17g", f.Name(), i, grad[i], wantGrad[i])
		}
	}
}

// Worked by hand.
func TestSquareWorked(t *testing.T) {
	// One-hot, 2 rows × 2 classes.
	//   row 0: f = (0.5, −1), y = (1, 0): (−0.5)² + (−1)² = 0.25 + 1 = 1.25
	//   row 1: f = (2, 0),    y = (0, 1): 2² + (−1)²     = 4 + 1    = 5
	//   mean (1.25 + 5)/2 = 3.125; gradient 2(f − y)/2 = f − y.
	checkEval(t, loss.Square[float64]{},
		[]float64{0.5, -1, 2, 0}, []float64{1, 0, 0, 1}, 2, 2,
		3.125, []float64{-0.5, -1, 2, -1})
	// Binary, targets ±1: f = (0.5, −2, 1), y = (1, 1, −1):
	//   (−0.5)² + (−3)² + 2² = 0.25 + 9 + 4 = 13.25, mean 13.25/3;
	//   gradient 2(f − y)/3 = (−1/3, −2, 4/3).
	checkEval(t, loss.Square[float64]{},
		[]float64{0.5, -2, 1}, []float64{1, 1, -1}, 3, 1,
		13.25/3, []float64{-1.0 / 3, -2, 4.0 / 3})
}

// Worked by hand.
func TestRescaledWorked(t *testing.T) {
	// K = 2, M = 3, C = 2 classes, 2 rows.
	//   row 0: f = (2, 1),  class 0: (1/2)[2·(2 − 3)² + 1²]  = (1/2)(2 + 1) = 1.5
	//   row 1: f = (0, −1), class 1: (1/2)[2·(−1 − 3)² + 0²] = (1/2)(32)    = 16
	//   mean (1.5 + 16)/2 = 8.75.
	// Gradient 2/(C·rows) = 1/2 times K(f_c − M) at the class, f_i elsewhere:
	//   row 0: (1/2)·2·(−1) = −1, (1/2)·1 = 0.5; row 1: (1/2)·0 = 0, (1/2)·2·(−4) = −4.
	checkEval(t, loss.Rescaled[float64]{K: 2, M: 3},
		[]float64{2, 1, 0, -1}, []float64{1, 0, 0, 1}, 2, 2,
		8.75, []float64{-1, 0.5, 0, -4})
}

// Worked by hand.
func TestCrossEntropyWorked(t *testing.T) {
	// row 0: logits (0, ln 3): softmax (1/4, 3/4); class 1: −ln(3/4) = ln(4/3).
	// row 1: logits (0, 0):    softmax (1/2, 1/2); class 0: ln 2.
	// mean (ln(4/3) + ln 2)/2 = ln(8/3)/2.
	// Gradient (softmax − y)/2: row 0 (1/4, −1/4)/2 = (0.125, −0.125);
	// row 1 (−1/2, 1/2)/2 = (−0.25, 0.25).
	checkEval(t, loss.CrossEntropy[float64]{},
		[]float64{0, math.Log(3), 0, 0}, []float64{0, 1, 1, 0}, 2, 2,
		math.Log(8.0/3)/2, []float64{0.125, -0.125, -0.25, 0.25})
	// Soft target (0.5, 1) on logits (0, ln 3), one row:
	//   −0.5·ln(1/4) − 1·ln(3/4) = 0.5·ln 4 + ln(4/3) = ln 2 + ln(4/3) = ln(8/3);
	//   gradient softmax·1.5 − y = (3/8 − 1/2, 9/8 − 1) = (−1/8, 1/8).
	checkEval(t, loss.CrossEntropy[float64]{},
		[]float64{0, math.Log(3)}, []float64{0.5, 1}, 1, 2,
		math.Log(8.0/3), []float64{-0.125, 0.125})
}

// Worked by hand.
func TestLogisticWorked(t *testing.T) {
	// f = (0, ln 3), y = (1, −1): margins 0 and −ln 3.
	//   row 0: ln(1 + 1) = ln 2; row 1: ln(1 + e^{ln 3}) = ln 4; mean 3 ln 2 / 2.
	// Gradient −y·σ(−y f)/2 with σ(t) = 1/(1 + e^{−t}):
	//   row 0: −σ(0)/2 = −1/4; row 1: +σ(ln 3)/2 = (3/4)/2 = 3/8.
	checkEval(t, loss.Logistic[float64]{},
		[]float64{0, math.Log(3)}, []float64{1, -1}, 2, 1,
		3*math.Ln2/2, []float64{-0.25, 0.375})
}

// Worked by hand.
func TestExponentialWorked(t *testing.T) {
	// f = (0, ln 2, ln 2), y = (1, 1, −1): exp(0) = 1, exp(−ln 2) = 1/2,
	// exp(ln 2) = 2; mean 3.5/3 = 7/6.
	// Gradient −y·exp(−y f)/3 = (−1/3, −1/6, 2/3).
	checkEval(t, loss.Exponential[float64]{},
		[]float64{0, math.Ln2, math.Ln2}, []float64{1, 1, -1}, 3, 1,
		7.0/6, []float64{-1.0 / 3, -1.0 / 6, 2.0 / 3})
}
