package gauge

import (
	"errors"
	"fmt"
	"math"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
)

// BoundOptions sets the margin γ and the confidence δ of MarginBound. The
// zero value is invalid for Gamma, which must be chosen (positive) before
// the data are seen; see BestMarginBound for a grid of γ.
type BoundOptions struct {
	Gamma float64 // γ > 0, on the scale of the normalized margins
	Delta float64 // δ in (0, 1); zero means 0.05
}

// BoundReport is the margin bound on the test error of the normalized
// network, term by term (see MarginBound), with the measured test error
// beside it.
type BoundReport struct {
	Gamma, Delta float64
	N            int     // training rows the bound is computed on
	Depth        int     // L, the number of dense layers
	Classes      int     // C; 2 with one ±1 output
	InputNorm    float64 // B = max_n ‖x_n‖ at the first dense layer's input
	// FracBelow is (1/n)#{margin ≤ γ}; RampLoss the (1/n)Σ Φ_γ(margin) of
	// the theorem, with Φ_γ(t) = 1 for t ≤ 0, 1 − t/γ for 0 < t < γ, 0 for
	// t ≥ γ. RampLoss ≤ FracBelow.
	FracBelow, RampLoss float64
	// Rademacher is the Golowich–Rakhlin–Shamir bound on the empirical
	// Rademacher complexity of depth-L networks with ∏‖V_k‖_F ≤ 1,
	// B(√(2 ln 2 · L) + 1)/√n.
	Rademacher float64
	// Complexity = (2/γ)·Rademacher for one output, (4C/γ)·Rademacher for C.
	Complexity float64
	// Confidence = 3√(ln(2/δ)/(2n)).
	Confidence float64
	// Bound = RampLoss + Complexity + Confidence. It can exceed 1, and
	// usually does: see the package documentation.
	Bound float64
	// TestError is the measured fraction of test rows with margin ≤ 0
	// (BoundOf); NaN when no test set was given.
	TestError float64
}

// GRSRademacher returns B(√(2 ln 2 · L) + 1)·∏M_k/√n with ∏M_k = 1: the
// Golowich–Rakhlin–Shamir (2018, Theorem 1) bound on the empirical
// Rademacher complexity of real-valued depth-L networks with 1-Lipschitz,
// positively homogeneous activations (ReLU), ‖W_k‖_F ≤ M_k and inputs
// ‖x_n‖ ≤ B.
func GRSRademacher(b float64, depth, n int) float64 {
	return b * (math.Sqrt(2*math.Ln2*float64(depth)) + 1) / math.Sqrt(float64(n))
}

// MarginBound bounds the test error of the normalized network from its
// training margins: with probability at least 1 − δ over the draw of the n
// training rows,
//
//	P(margin ≤ 0) ≤ (1/n)Σ_n Φ_γ(margin_n) + (K/γ)·B(√(2 ln 2 · L) + 1)/√n + 3√(ln(2/δ)/(2n)),
//
// K = 2 for one ±1 output and K = 4C for C classes (see the package
// documentation for the derivation and its sources). margins are the
// normalized training margins, b the largest norm of an input to the first
// dense layer, depth the number of dense layers, nclass the classes (2 for
// one output, when the factor 2 applies; otherwise nclass = C outputs).
// oneOutput tells which case holds. γ must be fixed independently of the
// training data.
func MarginBound(margins []float64, b float64, depth, nclass int, oneOutput bool, o BoundOptions) (*BoundReport, error) {
	n := len(margins)
	delta := o.Delta
	if delta == 0 {
		delta = 0.05
	}
	switch {
	case n < 1:
		return nil, errors.New("gauge: MarginBound: no margins")
	case !(o.Gamma > 0) || math.IsInf(o.Gamma, 0):
		return nil, fmt.Errorf("gauge: MarginBound: γ = %v; want a positive margin", o.Gamma)
	case !(delta > 0 && delta < 1):
		return nil, fmt.Errorf("gauge: MarginBound: δ = %v; want 0 < δ < 1", delta)
	case !(b >= 0) || math.IsInf(b, 0):
		return nil, fmt.Errorf("gauge: MarginBound: input norm B = %v; want a finite B ≥ 0", b)
	case depth < 1:
		return nil, fmt.Errorf("gauge: MarginBound: depth %d; want at least one layer", depth)
	case nclass < 2:
		return nil, fmt.Errorf("gauge: MarginBound: %d classes; want at least 2", nclass)
	}
	r := &BoundReport{Gamma: o.Gamma, Delta: delta, N: n, Depth: depth, Classes: nclass, InputNorm: b, TestError: math.NaN()}
	g := o.Gamma
	for _, m := range margins {
		if m <= g {
			r.FracBelow++
		}
		switch {
		case m <= 0:
			r.RampLoss++
		case m < g:
			r.RampLoss += 1 - m/g
		}
	}
	r.FracBelow /= float64(n)
	r.RampLoss /= float64(n)
	r.Rademacher = GRSRademacher(b, depth, n)
	k := 2.0
	if !oneOutput {
		k = 4 * float64(nclass)
	}
	r.Complexity = k / g * r.Rademacher
	r.Confidence = 3 * math.Sqrt(math.Log(2/delta)/(2*float64(n)))
	r.Bound = r.RampLoss + r.Complexity + r.Confidence
	return r, nil
}

// BestMarginBound evaluates MarginBound at every γ of a grid fixed in
// advance, each at confidence δ/K for the K values of the grid, and
// returns the smallest. By the union bound, the result holds with
// probability at least 1 − δ although γ was chosen after seeing the data.
func BestMarginBound(margins []float64, b float64, depth, nclass int, oneOutput bool, gammas []float64, delta float64) (*BoundReport, error) {
	if len(gammas) == 0 {
		return nil, errors.New("gauge: BestMarginBound: no values of γ")
	}
	if delta == 0 {
		delta = 0.05
	}
	var best *BoundReport
	for _, g := range gammas {
		r, err := MarginBound(margins, b, depth, nclass, oneOutput, BoundOptions{Gamma: g, Delta: delta / float64(len(gammas))})
		if err != nil {
			return nil, err
		}
		if best == nil || r.Bound < best.Bound {
			best = r
		}
	}
	best.Delta = delta // the guarantee of the whole grid
	return best, nil
}

// ErrNotHomogeneous is returned by BoundOf for a network with a node after
// its first dense layer that is not a dense layer or a ReLU: the
// Golowich–Rakhlin–Shamir bound needs 1-Lipschitz, positively homogeneous
// activations, which smooth and polynomial stand-ins for ReLU are not.
var ErrNotHomogeneous = errors.New("gauge: the norm bound needs a bias-free network of dense layers and ReLUs after its first dense layer")

// InputNorm returns the largest Euclidean norm of a row of set as seen by
// the network's first dense layer (after a constant feature, say, which
// adds 1 to every squared norm), and checks that the nodes from the first
// dense layer on are dense layers and ReLUs. It runs a forward pass.
func InputNorm[T net.Float](m Model[T], set *data.Set[T]) (float64, error) {
	base := m.Base()
	nodes := base.Nodes()
	first := -1
	for i, nd := range nodes {
		if _, ok := nd.(*net.Dense[T]); ok && first < 0 {
			first = i
		}
		if first >= 0 {
			switch nd.(type) {
			case *net.Dense[T], *net.ReLU[T]:
			default:
				return 0, fmt.Errorf("%w (node %q is %s)", ErrNotHomogeneous, nd.Name(), nd.Kind())
			}
		}
	}
	var b float64
	_, err := sweep(m, set, func(start, rows int, _ []T) {
		x, w := set.X[start*set.Features:(start+rows)*set.Features], set.Features
		if first > 0 {
			x, w = base.Output(nodes[first-1].Name())
		}
		for r := range rows {
			b = max(b, net.FrobeniusNorm(x[r*w:(r+1)*w]))
		}
	})
	return b, err
}

// BoundOf computes MarginBound for m on the training set train and, when
// test is not nil, measures the test error beside it.
func BoundOf[T net.Float](m Model[T], train, test *data.Set[T], o BoundOptions) (*BoundReport, error) {
	b, err := InputNorm(m, train)
	if err != nil {
		return nil, err
	}
	mr, err := MarginsOf(m, train, MarginOptions{KeepValues: true})
	if err != nil {
		return nil, err
	}
	r, err := MarginBound(mr.Values, b, len(m.Base().Dense()), classes(train.Outputs), train.Outputs == 1, o)
	if err != nil {
		return nil, err
	}
	if test != nil {
		tr, err := MarginsOf(m, test, MarginOptions{})
		if err != nil {
			return nil, err
		}
		r.TestError = float64(tr.All.Errors) / float64(tr.All.Rows)
	}
	return r, nil
}
