package checks

import (
	"math"
	"path/filepath"
	"slices"
	"testing"

	"github.com/rhomb/rhomb/data"
	"github.com/rhomb/rhomb/net"
	"github.com/rhomb/rhomb/optim/modelfile"
)

// The helpers below are the second half of every check: the trained model
// goes through a model file and back, and the loaded model must give the
// very same predictions as the one in memory.
//
// "Very same" is bit for bit, with no tolerance, and that follows from the
// arithmetic, not from hope: the file stores every float in its own
// format (float32 or float64 bytes, docs/model-file.md) and the pipeline's
// statistics as JSON, which encoding/json writes in the shortest form that
// parses back to the same float64; the serving path (ApplyStrings) and the
// training path (ApplyColumns) run each value through the one encoder of
// package prep; and a matrix product on the same inputs gives the same bits
// (internal/kern: the sum over k is never split). Any difference is a bug
// in one of those steps.

// predict runs f on the rows of s in one batch and returns a copy of the
// outputs (a network's output buffer is overwritten by its next Forward).
func predict[T net.Float](f interface{ Forward([]T, int) []T }, s *data.Set[T]) []T {
	return slices.Clone(f.Forward(s.X, s.Rows))
}

// correct counts the rows of s whose largest output (or, for one output,
// whose sign) names the row's class.
func correct[T net.Float](out []T, s *data.Set[T]) int {
	right := 0
	for r := range s.Rows {
		if data.ClassOf(out[r*s.Outputs:(r+1)*s.Outputs]) == s.Class(r) {
			right++
		}
	}
	return right
}

// sameBits fails the test at the first element where got and want differ
// in their bits. Widening float32 to float64 is exact, so comparing the
// float64 bits compares the original bits.
func sameBits[T net.Float](t *testing.T, what string, got, want []T) {
	t.Helper()
	if len(got) != len(want) {
		t.Fatalf("%s: %d values, want %d", what, len(got), len(want))
	}
	for i := range got {
		if math.Float64bits(float64(got[i])) != math.Float64bits(float64(want[i])) {
			t.Fatalf("%s: value %d is %v, want %v (bit for bit)", what, i, got[i], want[i])
		}
	}
}

// serveRoundTrip saves m to a fresh file, loads it, encodes the raw cells
// of the test rows (cells(r) for test row r, in the order of the
// pipeline's inputs) with the loaded pipeline, as a serving program
// would, predicts with the loaded network, and checks that the served features equal the
// training path's features of test and that the served outputs equal the
// outputs of the model in memory, bit for bit. It returns the outputs.
//
// m.Pipeline may be nil when the features are the inputs (cells is then
// ignored and test.X is served as it is).
func serveRoundTrip[T net.Float](t *testing.T, m *modelfile.Model[T], test *data.Set[T], cells func(r int) []string) []T {
	t.Helper()
	want := predict(m.Trainable(), test)

	path := filepath.Join(t.TempDir(), "model")
	if err := modelfile.Save(path, m); err != nil {
		t.Fatal(err)
	}
	got, err := modelfile.Load[T](path)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(got.Classes, m.Classes) || got.Label != m.Label || got.Loss != m.Loss {
		t.Errorf("loaded classes %q, label %q, loss %q; saved %q, %q, %q", got.Classes, got.Label, got.Loss, m.Classes, m.Label, m.Loss)
	}
	if (got.Normalized == nil) != (m.Normalized == nil) {
		t.Errorf("normalized wrapper: loaded %v, saved %v", got.Normalized != nil, m.Normalized != nil)
	}

	x := test.X
	if m.Pipeline != nil {
		if got.Pipeline == nil {
			t.Fatal("the loaded model has no pipeline")
		}
		p := got.Pipeline
		w := p.Width()
		x = make([]T, test.Rows*w)
		buf := make([]float64, w)
		for r := range test.Rows {
			if err := p.ApplyStrings(cells(r), buf); err != nil {
				t.Fatalf("serving row %d: %v", r, err)
			}
			for j, v := range buf {
				x[r*w+j] = T(v)
			}
		}
		sameBits(t, "served features against the training path's", x, test.X)
	}
	out := slices.Clone(got.Network.Forward(x, test.Rows))
	sameBits(t, "loaded network's outputs against the in-memory model's", out, want)
	if got.Normalized != nil {
		sameBits(t, "loaded wrapper's outputs against the in-memory model's", got.Normalized.Forward(x, test.Rows), want)
	}
	return out
}

// rowsOf returns the raw cells of the given rows of raw, for
// serveRoundTrip: cells(i) is raw[rows[i]].
func rowsOf(raw [][]string, rows []int) func(i int) []string {
	return func(i int) []string { return raw[rows[i]] }
}

// oneHidden builds the network every check here trains: the constant-one
// feature, one ReLU layer of width units and a linear readout, He-normal
// weights at scale rho0 (0: the scheme's own) from seed.
func oneHidden[T net.Float](t *testing.T, in, width, out int, rho0 float64, seed uint64) *net.Network[T] {
	t.Helper()
	n, err := net.NewBuilder[T](in).
		ConstantFeature("one").
		Dense("hidden", width).ReLU("relu").
		Readout("readout", out).
		Build()
	if err != nil {
		t.Fatal(err)
	}
	if err := n.Init(net.InitSettings{Scheme: net.HeNormal, Rho0: rho0, Seed: seed}); err != nil {
		t.Fatal(err)
	}
	return n
}
