package recipe

import (
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/internal/score"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
)

// Evaluation tallies a model's predictions on a labelled set.
type Evaluation struct {
	c *score.Confusion
	// scores and positive hold a two-class model's score and the truth
	// (the +1 class) of every row, for the AUC.
	scores   []float64
	positive []bool
	// MinMargin is the smallest normalized margin over the rows (see
	// Score.MinMargin); NaN when ρ is zero.
	MinMargin float64
}

// Evaluate runs the model over s in chunks (forward passes only) and
// tallies its predictions and normalized margins.
func Evaluate[T net.Float](m optim.Model[T], s *data.Set[T]) *Evaluation {
	names := s.Classes
	if len(names) != max(s.Outputs, 2) {
		names = make([]string, max(s.Outputs, 2))
	}
	e := &Evaluation{c: score.New(names), MinMargin: math.Inf(1)}
	rho := math.NaN()
	Predict(m, s, func(r int, out []T) {
		if math.IsNaN(rho) {
			// The forward pass has brought W = ρ·V up to date.
			rho = m.Base().Rho()
		}
		truth := s.Class(r)
		e.c.Add(truth, data.ClassOf(out))
		if len(out) == 1 {
			e.scores, e.positive = append(e.scores, float64(out[0])), append(e.positive, truth == 1)
		}
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

// Count returns how many rows of class i were predicted as class j.
func (e *Evaluation) Count(i, j int) int { return e.c.Count[i][j] }

// Classes is the number of classes tallied.
func (e *Evaluation) Classes() int { return len(e.c.Count) }

// Rows is the number of rows tallied.
func (e *Evaluation) Rows() int { return e.c.Total() }

// Accuracy is the fraction of rows classified right; NaN with none.
func (e *Evaluation) Accuracy() float64 { return e.c.Accuracy() }

// Balanced is the mean recall over the classes that have rows (balanced
// accuracy).
func (e *Evaluation) Balanced() float64 { return e.c.BalancedAccuracy() }

// MacroF1 is the mean F1 over the classes that have rows.
func (e *Evaluation) MacroF1() float64 { return e.c.MacroF1() }

// AUC is the area under the ROC curve of a two-class model's scores (the
// Mann–Whitney statistic over n₊n₋); NaN for more classes.
func (e *Evaluation) AUC() float64 {
	if e.scores == nil {
		return math.NaN()
	}
	return score.ROCAUC(e.scores, e.positive)
}

// Value is the evaluation's value by metric m: what a run ranks its
// epochs, and a sweep its runs, by.
func (e *Evaluation) Value(m Metric) float64 {
	switch m {
	case Balanced:
		return e.Balanced()
	case MacroF1:
		return e.MacroF1()
	case AUC:
		return e.AUC()
	}
	return e.Accuracy()
}

// Support is the number of rows of class k.
func (e *Evaluation) Support(k int) int {
	n := 0
	for _, v := range e.c.Count[k] {
		n += v
	}
	return n
}

// Recall is class k's fraction of rows classified right; NaN for a class
// with no rows.
func (e *Evaluation) Recall(k int) float64 { return float64(e.c.Count[k][k]) / float64(e.Support(k)) }

// Predicted counts the rows predicted as each class.
func (e *Evaluation) Predicted() []int {
	p := make([]int, len(e.c.Count))
	for _, row := range e.c.Count {
		for j, v := range row {
			p[j] += v
		}
	}
	return p
}

// Majority is the share of the rows in the most frequent class.
func (e *Evaluation) Majority() float64 {
	most := 0
	for k := range e.c.Count {
		most = max(most, e.Support(k))
	}
	return float64(most) / float64(e.Rows())
}
