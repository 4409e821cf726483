package calib_test

import (
	"fmt"

	"github.com/rhomb/rhomb/internal/calib"
)

// A two-class model's signed scores on twelve validation rows (invented
// numbers), and whether each row is of the second class.
func Example() {
	scores := []float64{-2.1, -1.3, -0.8, -0.2, 0.1, 0.4, 0.9, 1.5, 2.2, -0.5, 0.7, 1.1}
	positive := []bool{false, false, false, true, false, true, true, true, true, false, false, true}

	// Calibrated probabilities.
	p, err := calib.FitPlatt(scores, positive)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("P(class 1 | s = 1) = %.2f\n", p.Prob(1))

	// A decision threshold for balanced accuracy.
	t, v := calib.BestThreshold(scores, positive, calib.Balanced)
	fmt.Printf("threshold %.2f, balanced accuracy %.3f\n", t, v)

	// Split-conformal sets at α = 0.2: nonconformity 1 − p(true class).
	non := make([]float64, len(scores))
	for i, s := range scores {
		p1 := p.Prob(s)
		if positive[i] {
			non[i] = 1 - p1
		} else {
			non[i] = p1
		}
	}
	q := calib.ConformalThreshold(non, 0.2)
	p1 := p.Prob(0.3)
	fmt.Printf("q̂ = %.3f; set for s = 0.3: %v\n", q, calib.Set([]float64{1 - p1, p1}, q, nil))

	// A reject option on the distance from the threshold.
	margins := make([]float64, len(scores))
	correct := make([]bool, len(scores))
	for i, s := range scores {
		margins[i] = max(s-t, t-s)
		correct[i] = (s > t) == positive[i]
	}
	tau, answered := calib.RejectThreshold(margins, correct, 0)
	fmt.Printf("answer when |s − t| ≥ %.2f: %.0f%% of rows\n", tau, 100*answered)
	// Output:
	// P(class 1 | s = 1) = 0.72
	// threshold 0.25, balanced accuracy 0.833
	// q̂ = 0.613; set for s = 0.3: [0 1]
	// answer when |s − t| ≥ 0.65: 67% of rows
}
