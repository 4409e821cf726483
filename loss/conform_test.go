package loss_test

import (
	"fmt"
	"testing"

	"github.com/rhomb/rhomb/internal/conform"
	"github.com/rhomb/rhomb/loss"
)

// Targets for the conformance runs. They are deterministic functions of the
// row so that every class and both signs occur.

func pm1(row int) []float64 {
	if (row*5+1)%3 == 0 {
		return []float64{-1}
	}
	return []float64{1}
}

func oneHot(cols int) func(row int) []float64 {
	return func(row int) []float64 {
		y := make([]float64, cols)
		y[(row*7+3)%cols] = 1
		return y
	}
}

// soft gives non-negative target weights that do not sum to 1 (0.25 to 1 in
// steps of 0.25, all representable in float32), exercising the Σ_j y_j
// factor of the cross-entropy gradient.
func soft(cols int) func(row int) []float64 {
	return func(row int) []float64 {
		y := make([]float64, cols)
		for j := range y {
			y[j] = float64((row+2*j)%4+1) / 4
		}
		return y
	}
}

func TestConformance(t *testing.T) {
	type tc struct {
		f64        loss.Func[float64]
		f32        loss.Func[float32]
		rows, cols int
		target     func(int) []float64
		what       string
	}
	var cases []tc
	for _, s := range []struct{ rows, cols int }{{1, 1}, {9, 1}} {
		cases = append(cases,
			tc{loss.Square[float64]{}, loss.Square[float32]{}, s.rows, s.cols, pm1, "±1"},
			tc{loss.Logistic[float64]{}, loss.Logistic[float32]{}, s.rows, s.cols, pm1, "±1"},
			tc{loss.Exponential[float64]{}, loss.Exponential[float32]{}, s.rows, s.cols, pm1, "±1"},
		)
	}
	for _, s := range []struct{ rows, cols int }{{1, 2}, {7, 3}, {5, 10}} {
		cases = append(cases,
			tc{loss.Square[float64]{}, loss.Square[float32]{}, s.rows, s.cols, oneHot(s.cols), "one-hot"},
			tc{loss.Rescaled[float64]{}, loss.Rescaled[float32]{}, s.rows, s.cols, oneHot(s.cols), "one-hot"},
			tc{loss.Rescaled[float64]{K: 2, M: 3}, loss.Rescaled[float32]{K: 2, M: 3}, s.rows, s.cols, oneHot(s.cols), "one-hot K=2 M=3"},
			tc{loss.CrossEntropy[float64]{}, loss.CrossEntropy[float32]{}, s.rows, s.cols, oneHot(s.cols), "one-hot"},
			tc{loss.CrossEntropy[float64]{}, loss.CrossEntropy[float32]{}, s.rows, s.cols, soft(s.cols), "soft"},
		)
	}
	// One logit per row: the softmax is identically 1 and the loss 0.
	cases = append(cases, tc{loss.CrossEntropy[float64]{}, loss.CrossEntropy[float32]{}, 4, 1, oneHot(1), "one class"})
	for _, c := range cases {
		t.Run(fmt.Sprintf("%s/rows=%d/cols=%d/%s", c.f64.Name(), c.rows, c.cols, c.what), func(t *testing.T) {
			conform.Loss(t, c.f64, c.f32, c.rows, c.cols, c.target)
		})
	}
}
