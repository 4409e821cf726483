package sweep

import (
	"errors"
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim"
	"github.com/rhomb/rhomb/optim/gauge"
)

// Measure takes the measures a Result records from a trained model: the
// accuracy on val and on train (a row is right when the output decides
// for its class, data.ClassOf, as the rhomb command counts), the minimum
// and mean normalized margin of the training rows (gauge.MarginsOf), the
// margin bound on the training rows with bound's γ and δ (gauge.BoundOf),
// and ρ. val may be nil (ValAccuracy is then NaN). bound.Gamma = 0 skips
// the bound, and a network the bound does not hold for (smooth or
// polynomial activations: gauge.ErrNotHomogeneous) gets NaN too; either
// way the bound then breaks no ties. The Point, Loss, Epochs and Status of
// the result are left for the caller (see FromRun).
//
// Measure runs forward passes over the sets, overwriting the model's
// stored activations; call it after training, not from a hook.
func Measure[T net.Float](m gauge.Model[T], train, val *data.Set[T], bound gauge.BoundOptions) (Result, error) {
	r := NaNResult(Point{})
	mr, err := gauge.MarginsOf(m, train, gauge.MarginOptions{})
	if err != nil {
		return r, err
	}
	r.MarginMin, r.MarginMean, r.Rho = mr.All.Min, mr.All.Mean, mr.Rho
	r.TrainAccuracy = accuracy(m, train)
	if val != nil {
		r.ValAccuracy = accuracy(m, val)
		r.ValScore, r.Metric = r.ValAccuracy, "accuracy"
	}
	if bound.Gamma != 0 {
		br, err := gauge.BoundOf(m, train, nil, bound)
		switch {
		case errors.Is(err, gauge.ErrNotHomogeneous):
		case err != nil:
			return r, err
		default:
			r.Bound = br.Bound
		}
	}
	return r, nil
}

// FromRun copies what a trainer's result tells into r: the last epoch's
// loss, the epochs run and the status.
func FromRun(r *Result, res optim.Result) {
	r.Loss, r.Epochs, r.Status = res.Loss, res.Epochs, res.Status.String()
}

// accuracy is the fraction of rows whose output decides for their class.
func accuracy[T net.Float](m gauge.Model[T], s *data.Set[T]) float64 {
	const chunk = 256
	right := 0
	for start := 0; start < s.Rows; start += chunk {
		rows := min(chunk, s.Rows-start)
		out := m.Forward(s.X[start*s.Features:(start+rows)*s.Features], rows)
		for r := range rows {
			if data.ClassOf(out[r*s.Outputs:(r+1)*s.Outputs]) == s.Class(start+r) {
				right++
			}
		}
	}
	if s.Rows == 0 {
		return math.NaN()
	}
	return float64(right) / float64(s.Rows)
}
