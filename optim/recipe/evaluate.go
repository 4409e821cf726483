package recipe

import (
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// Evaluation tallies a model's predictions on a labelled set.
type Evaluation struct {
	// Count[i][j] rows of class i were predicted as class j.
	Count [][]int
	// MinMargin is the smallest normalized margin over the rows (see
	// Score.MinMargin); NaN when ρ is zero.
	MinMargin float64
}

// Evaluate runs the model over s in chunks (forward passes only) and
// tallies its predictions and normalized margins.
func Evaluate[T net.Float](m optim.Model[T], s *data.Set[T]) *Evaluation {
	classes := max(s.Outputs, 2)
	e := &Evaluation{Count: make([][]int, classes), MinMargin: math.Inf(1)}
	for i := range e.Count {
		e.Count[i] = make([]int, classes)
	}
	rho := math.NaN()
	Predict(m, s, func(r int, out []T) {
		if math.IsNaN(rho) {
			// The forward pass has brought W = ρ·V up to date.
			rho = m.Base().Rho()
		}
		truth := s.Class(r)
		e.Count[truth][data.ClassOf(out)]++
		e.MinMargin = min(e.MinMargin, margin(out, s.Y[r*s.Outputs:(r+1)*s.Outputs], truth)/rho)
	})
	if !(rho > 0) {
		e.MinMargin = math.NaN()
	}
	return e
}

// margin is y·f for one ±1 output, f_y − max_{j≠y} f_j for more.
func margin[T net.Float](out, y []T, class int) float64 {
	if len(out) == 1 {
		return float64(y[0]) * float64(out[0])
	}
	other := math.Inf(-1)
	for j, v := range out {
		if j != class {
			other = max(other, float64(v))
		}
	}
	return float64(out[class]) - other
}

// Predict runs the model over s in chunks and calls f with each row's
// outputs, valid during the call.
func Predict[T net.Float](m optim.Model[T], s *data.Set[T], f func(r int, out []T)) {
	const chunk = 1024
	for start := 0; start < s.Rows; start += chunk {
		rows := min(chunk, s.Rows-start)
		out := m.Forward(s.X[start*s.Features:(start+rows)*s.Features], rows)
		for r := range rows {
			f(start+r, out[r*s.Outputs:(r+1)*s.Outputs])
		}
	}
}

// Rows is the number of rows tallied.
func (e *Evaluation) Rows() int {
	n := 0
	for _, row := range e.Count {
		for _, v := range row {
			n += v
		}
	}
	return n
}

// Accuracy is the fraction of rows classified right; NaN with none.
func (e *Evaluation) Accuracy() float64 {
	right := 0
	for i := range e.Count {
		right += e.Count[i][i]
	}
	return float64(right) / float64(e.Rows())
}

// Recall is class k's fraction of rows classified right; NaN for a class
// with no rows.
func (e *Evaluation) Recall(k int) float64 {
	n := 0
	for _, v := range e.Count[k] {
		n += v
	}
	return float64(e.Count[k][k]) / float64(n)
}

// Balanced is the mean recall over the classes that have rows (balanced
// accuracy; common practice, no source).
func (e *Evaluation) Balanced() float64 {
	sum, n := 0.0, 0
	for k := range e.Count {
		if r := e.Recall(k); !math.IsNaN(r) {
			sum += r
			n++
		}
	}
	return sum / float64(n)
}

// Predicted counts the rows predicted as each class.
func (e *Evaluation) Predicted() []int {
	p := make([]int, len(e.Count))
	for _, row := range e.Count {
		for j, v := range row {
			p[j] += v
		}
	}
	return p
}

// Majority is the share of the rows in the most frequent class.
func (e *Evaluation) Majority() float64 {
	most := 0
	for _, row := range e.Count {
		n := 0
		for _, v := range row {
			n += v
		}
		most = max(most, n)
	}
	return float64(most) / float64(e.Rows())
}
