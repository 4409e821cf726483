package gauge

import (
	"errors"
	"fmt"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
)

// Model is what gauge measures: a *net.Network, or a wrapper around one
// such as *normalize.Net. Forward must compute the network's current
// function (normalize.Net writes W = ρ·V before it runs); Base gives the
// dense layers whose W the measures read. Every optim.Model satisfies it.
type Model[T net.Float] interface {
	Forward(x []T, rows int) []T
	Base() *net.Network[T]
}

// chunk is the number of rows gauge pushes through Forward at once. It
// bounds the activation buffers a pass over a large set grows (the network
// keeps buffers for the largest batch it has seen).
const chunk = 256

// ErrNoScale is returned when a dense layer's weights are all zero: the
// network then has no direction V and no normalized output.
var ErrNoScale = errors.New("gauge: a dense layer's weights are all zero, so the network has no normalized output; initialize it first")

// sweep runs m over every row of set in chunks, calling visit with the
// first row's index, the row count, the outputs and the model. It returns
// ρ = ∏‖W_k‖_F, read before the pass.
func sweep[T net.Float](m Model[T], set *data.Set[T], visit func(start, rows int, out []T)) (float64, error) {
	if set == nil || set.Rows < 1 {
		return 0, errors.New("gauge: empty data set")
	}
	base := m.Base()
	if set.Features != base.In() || set.Outputs != base.Out() {
		return 0, fmt.Errorf("gauge: the data has %d features and %d target columns, the network takes %d and gives %d", set.Features, set.Outputs, base.In(), base.Out())
	}
	rho := base.Rho()
	if !(rho > 0) {
		return 0, ErrNoScale
	}
	for start := 0; start < set.Rows; start += chunk {
		rows := min(chunk, set.Rows-start)
		out := m.Forward(set.X[start*set.Features:(start+rows)*set.Features], rows)
		visit(start, rows, out)
	}
	return rho, nil
}

// classes returns the number of classes a set encodes: 2 for one ±1
// column, the number of columns otherwise.
func classes(outputs int) int {
	if outputs == 1 {
		return 2
	}
	return outputs
}

// decide returns the class a network output row decides for: the sign for
// one output (1 if positive), the largest output otherwise (the first on a
// tie). It reads the same way as data.ClassOf reads a target row.
func decide[T net.Float](out []T) int { return data.ClassOf(out) }
